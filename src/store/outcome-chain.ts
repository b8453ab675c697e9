import { hash } from 'node:crypto';

/** The outcome chain starts from 32 zero bytes, as the scored rows' does (chain.ts). */
export const OUTCOME_GENESIS = Buffer.alloc(32);

/** The columns of an outcome row that its chain seals, as stored (migration 009). */
export interface OutcomeRow {
  seq: number;
  request_id: string;
  label: string;
  observed_at: number | null;
  source: string | null;
  recorded_at: number;
  key_label: string | null;
  replaces: number | null;
}

// A prefix of its own, so that the bytes of an outcome row can never be those of a scored row.
const PREFIX = Buffer.from('plumbline-outcome/1\0', 'utf8');

/**
 * The bytes an outcome row contributes: the prefix, then its columns in the order of OutcomeRow;
 * numbers as float64 (exact for the integers stored), text after its length as an int32, and a
 * null as the int32 -1 alone (a present number is preceded by 8), so that no two rows give the
 * same bytes.
 */
export function outcomeBytes(r: OutcomeRow): Buffer {
  const parts: Buffer[] = [PREFIX];
  const num = (v: number): void => {
    const b = Buffer.allocUnsafe(8);
    b.writeDoubleLE(v);
    parts.push(b);
  };
  const len = (n: number): void => {
    const b = Buffer.allocUnsafe(4);
    b.writeInt32LE(n);
    parts.push(b);
  };
  const text = (v: string | null): void => {
    if (v === null) return len(-1);
    const t = Buffer.from(v, 'utf8');
    len(t.length);
    parts.push(t);
  };
  const maybe = (v: number | null): void => {
    if (v === null) return len(-1);
    len(8);
    num(v);
  };
  num(r.seq);
  text(r.request_id);
  text(r.label);
  maybe(r.observed_at);
  text(r.source);
  num(r.recorded_at);
  text(r.key_label);
  maybe(r.replaces);
  return Buffer.concat(parts);
}

/** hash_i = SHA-256(hash_{i-1} || outcomeBytes(row_i)), as for the scored rows. */
export function outcomeHash(previous: Buffer, row: OutcomeRow): Buffer {
  return hash('sha256', Buffer.concat([previous, outcomeBytes(row)]), 'buffer');
}
