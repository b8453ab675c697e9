import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';
import type { Readable } from 'node:stream';
import { type CsvRecord, CsvSyntaxError, parseCsvRecords } from './csv-records.js';

/** A problem in a data file, located so that a person can open the file and find it. */
export class DataFileError extends Error {
  constructor(
    readonly file: string,
    readonly line: number | null,
    readonly column: string | null,
    readonly reason: string,
  ) {
    const where = [line !== null ? `line ${line}` : null, column !== null ? `column ${JSON.stringify(column)}` : null].filter(Boolean).join(', ');
    super(`${file}${where ? `, ${where}` : ''}: ${reason}`);
    this.name = 'DataFileError';
  }
}

export type CsvRow = CsvRecord;

export interface CsvSource {
  header: string[];
  /** Line of the header row (after any blank lines). */
  headerLine: number;
  rows: AsyncIterable<CsvRow>;
  /** sha256 of every byte read, complete once rows has been iterated to the end. */
  sha256(): string;
}

/**
 * A CSV file with a header row (RFC 4180, see csv-records.ts), streamed. A syntax error ends the
 * stream with an error naming its line; rows of the wrong width are passed on for the reader to
 * report (parseFeatures does), so that one short row does not stop a long file.
 */
export async function openCsv(input: string | Readable, name = typeof input === 'string' ? input : 'input'): Promise<CsvSource> {
  const stream = typeof input === 'string' ? createReadStream(input) : input;
  const hash = createHash('sha256');
  async function* hashed(): AsyncGenerator<Buffer | string> {
    for await (const chunk of stream as AsyncIterable<Buffer | string>) {
      hash.update(chunk);
      yield chunk;
    }
  }
  const records = parseCsvRecords(hashed());
  const translate = (err: unknown): unknown => {
    if (err instanceof CsvSyntaxError) return new DataFileError(name, err.line, null, err.message);
    const code = (err as NodeJS.ErrnoException).code;
    if (code === 'ENOENT' || code === 'EACCES' || code === 'EISDIR') return new DataFileError(name, null, null, `cannot be read (${code})`);
    return err;
  };

  let first: IteratorResult<CsvRecord>;
  try {
    first = await records.next();
  } catch (err) {
    throw translate(err);
  }
  if (first.done) throw new DataFileError(name, null, null, 'is empty; a header row is needed');
  const header = first.value.fields.map((h) => h.trim());
  const headerLine = first.value.line;
  const seen = new Map<string, number>();
  header.forEach((h, i) => {
    if (h === '') throw new DataFileError(name, headerLine, null, `header field ${i + 1} is empty`);
    if (seen.has(h)) throw new DataFileError(name, headerLine, h, `column name appears twice (fields ${(seen.get(h) as number) + 1} and ${i + 1})`);
    seen.set(h, i);
  });

  async function* rows(): AsyncGenerator<CsvRow> {
    try {
      yield* records;
    } catch (err) {
      throw translate(err);
    } finally {
      await records.return(undefined);
      stream.destroy();
    }
  }

  let digest: string | null = null;
  return { header, headerLine, rows: rows(), sha256: () => (digest ??= hash.digest('hex')) };
}

// A plain decimal number: no hex, no "Infinity", no empty string or padding that Number() would accept.
const DECIMAL = /^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$/;

/** Parses a CSV field as a finite decimal number, or returns a reason why it is not one. */
export function parseDecimal(text: string): number | string {
  const t = text.trim();
  if (t === '') return 'is empty; a number is needed';
  if (!DECIMAL.test(t)) return `is ${JSON.stringify(text.length > 40 ? `${text.slice(0, 40)}...` : text)}, not a number`;
  const v = Number(t);
  if (!Number.isFinite(v)) return `is ${t}, beyond the range of a float64`;
  return v;
}
