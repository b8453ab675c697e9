import { createHash } from 'node:crypto';

/** The chain starts from 32 zero bytes. */
export const GENESIS = Buffer.alloc(32);

/** The columns of a scored row that the chain seals, as stored. */
export interface ChainedRow {
  seq: number;
  request_id: string;
  batch_id: string | null;
  received_at: number;
  model_sha256: string;
  model_name: string;
  model_version: string;
  features: Buffer;
  tags: string | null;
  label: string;
  probabilities: Buffer;
  margin: number;
  in_domain: number;
  review: number;
  domain: string;
  latency_us: number;
  key_label: string | null;
}

/**
 * The bytes a row contributes: its stored columns in a fixed order, each length-prefixed, so that
 * no two different rows give the same bytes. Numbers are written as float64 (exact for the
 * integers stored here), blobs and text as they are.
 */
export function rowBytes(r: ChainedRow): Buffer {
  const parts: Buffer[] = [];
  const num = (v: number): void => {
    const b = Buffer.allocUnsafe(8);
    b.writeDoubleLE(v);
    parts.push(b);
  };
  const bytes = (b: Buffer | null): void => {
    const len = Buffer.allocUnsafe(4);
    len.writeInt32LE(b === null ? -1 : b.length);
    parts.push(len);
    if (b !== null) parts.push(b);
  };
  const text = (s: string | null): void => bytes(s === null ? null : Buffer.from(s, 'utf8'));
  num(r.seq);
  text(r.request_id);
  text(r.batch_id);
  num(r.received_at);
  text(r.model_sha256);
  text(r.model_name);
  text(r.model_version);
  bytes(r.features);
  text(r.tags);
  text(r.label);
  bytes(r.probabilities);
  num(r.margin);
  num(r.in_domain);
  num(r.review);
  text(r.domain);
  num(r.latency_us);
  text(r.key_label);
  return Buffer.concat(parts);
}

/** hash_i = SHA-256(hash_{i-1} || rowBytes(row_i)). */
export function chainHash(previous: Buffer, row: ChainedRow): Buffer {
  return createHash('sha256').update(previous).update(rowBytes(row)).digest();
}
