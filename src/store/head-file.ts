import { closeSync, fsyncSync, openSync, readFileSync, renameSync, writeSync } from 'node:fs';
import { dirname } from 'node:path';
import { z } from 'zod';

// The chain head kept outside the database: a small file beside it, written by the serving
// process after each WAL checkpoint, that `plumbline audit verify` checks by default. Rows cut
// from the end of the log leave the chain intact (every row left still chains), so only a head
// recorded elsewhere can tell a cut tail from a shorter log (docs/security.md).

export const HEAD_FILE_FORMAT = 'plumbline-chain-head/1';

const anchorSchema = z.strictObject({ seq: z.number().int().min(1), hash: z.string().regex(/^[0-9a-f]{64}$/) });

const headFileSchema = z.strictObject({
  format: z.literal(HEAD_FILE_FORMAT),
  seq: z.number().int().min(0),
  hash: z.string().regex(/^[0-9a-f]{64}$/),
  /** The outcome chain's head (its newest outcome), once one is recorded; files written before it have none. */
  outcomes: anchorSchema.optional(),
  written_at: z.string(),
});

export type HeadRecord = z.infer<typeof headFileSchema>;

/** Where the head of database `file` is kept. */
export function headFilePath(file: string): string {
  return `${file}.head`;
}

/**
 * Writes the head so that a crash at any point leaves either the old file or the new one: a
 * temporary file, synced, renamed over the old, and the directory synced (rename(2) is atomic;
 * the directory's fsync makes the rename itself durable).
 */
export function writeHeadFile(path: string, head: { seq: number; hash: string; outcomes?: { seq: number; hash: string } | null }, now: Date = new Date()): void {
  const record: HeadRecord = { format: HEAD_FILE_FORMAT, seq: head.seq, hash: head.hash, ...(head.outcomes ? { outcomes: head.outcomes } : {}), written_at: now.toISOString() };
  const tmp = `${path}.tmp`;
  const fd = openSync(tmp, 'w', 0o644);
  try {
    writeSync(fd, `${JSON.stringify(record)}\n`);
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
  renameSync(tmp, path);
  const dir = openSync(dirname(path), 'r');
  try {
    fsyncSync(dir);
  } finally {
    closeSync(dir);
  }
}

/** The head file's record; null when there is no such file; an Error saying why when it cannot be used. */
export function readHeadFile(path: string): HeadRecord | null | Error {
  let text: string;
  try {
    text = readFileSync(path, 'utf8');
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === 'ENOENT') return null;
    return new Error(`${path} cannot be read (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})`);
  }
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch {
    return new Error(`${path} is not the JSON a head file holds`);
  }
  const parsed = headFileSchema.safeParse(json);
  if (!parsed.success) return new Error(`${path} is not a ${HEAD_FILE_FORMAT} record (${parsed.error.issues.map((i) => `${i.path.join('.') || 'file'}: ${i.message}`).join('; ')})`);
  return parsed.data;
}
