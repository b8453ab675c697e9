import { existsSync } from 'node:fs';
import { isServerUrl, maskUrl } from '../../store/location.js';
import { CopyRefusedError, type CopyOutcome, copySqliteLog } from '../../store/postgres/copy-log.js';
import { type CliIo, UsageError } from '../io.js';

/**
 * `plumbline migrate-log --from FILE --to URL`: copies a SQLite audit log into an empty
 * PostgreSQL database, both chains (the scored rows' and the outcomes') unchanged and checked row
 * by row, then verifies them on the server and prints the heads, which are the heads `audit
 * verify --db FILE` printed.
 */
export async function migrateLogAction(ctx: { from: string; to: string }, io: CliIo): Promise<CopyOutcome> {
  if (!existsSync(ctx.from)) throw new UsageError(`--from ${ctx.from}: no such file`);
  if (!isServerUrl(ctx.to)) throw new UsageError(`--to must be a postgres:// or postgresql:// URL, not ${JSON.stringify(maskUrl(ctx.to))}`);
  let shown = 0;
  let out: CopyOutcome;
  try {
    out = await copySqliteLog(ctx.from, ctx.to, (n) => {
      if (io.interactive && n - shown >= 50_000) {
        shown = n;
        io.stderr.write(`${n} scored rows copied\n`);
      }
    });
  } catch (err) {
    if (err instanceof CopyRefusedError) throw new UsageError(err.message);
    throw err;
  }
  const counts = Object.entries(out.rows).map(([t, n]) => `${t} ${n}`).join(', ');
  io.stdout.write(`copied ${ctx.from} to ${maskUrl(ctx.to)}: ${counts}\n`);
  if (out.duplicateNightlyReports > 0) io.stdout.write(`${out.duplicateNightlyReports} nightly report(s) of a model and day already copied were left out (one per model and day)\n`);
  const v = out.verdict;
  io.stdout.write(v.intact ? `intact on the server: ${v.rows} rows chain to row ${v.head.seq}\nhead ${v.head.seq}:${v.head.hash}\n` : `NOT intact on the server: ${v.problem?.detail}\n`);
  const o = out.outcomes;
  io.stdout.write(
    !o.intact
      ? `outcomes NOT intact on the server: ${o.problem?.detail}\n`
      : o.rows === 0
        ? 'outcomes: none recorded\n'
        : `outcomes intact on the server: ${o.rows} outcome${o.rows === 1 ? ' chains' : 's chain'} to ${o.head.seq} (head ${o.head.seq}:${o.head.hash})\n`,
  );
  if (!v.intact || !o.intact) process.exitCode = 1;
  return out;
}
