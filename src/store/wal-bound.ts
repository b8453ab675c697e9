import { statSync } from 'node:fs';
import type { Database } from 'better-sqlite3';

// How the -wal file is kept under log.wal_max_bytes while commits never stop.
//
// Why background checkpoints alone do not do it (SQLite, "Write-Ahead Logging", sections 4 and 6,
// and wal.c): the WAL is written again from its start only when a writer begins a transaction
// while every frame in it has been copied into the database. A checkpoint copies the frames that
// were there when it began; under steady load more have been appended by the time it ends, so
// that moment never comes and the file grows for ever (745 MiB beside a 57 MB database, issue 19).
//
// So when the WAL passes half the bound, the request log holds its next commit (the event loop
// goes on parsing and scoring; rows wait in the queue, as they do for any commit) while the
// checkpoint thread copies what is left, with nothing appending. The writer's next transaction
// then starts the WAL again from its start, and `journal_size_limit` truncates the file at that
// commit (PRAGMA journal_size_limit), so the file itself shrinks, not only the part in use.
// Without a checkpoint thread (the CLI, or that thread failed), the writer runs that checkpoint
// itself after its commit, on its own thread.
//
// A reader that holds an old snapshot for long (a backup, a long query from another process)
// stops any checkpoint at its snapshot; the WAL then grows past the bound until it lets go.

/** log.wal_max_bytes by default. */
export const DEFAULT_WAL_MAX_BYTES = 64 * 2 ** 20;

/** The WAL size at which the checkpoint is finished: half the bound, leaving room for the commits meanwhile. */
export const walTrigger = (maxBytes: number): number => Math.floor(maxBytes / 2);

export interface WalWatch {
  /** Called by the writer after its commits; returns the WAL file's size (0 without a file). */
  afterCommit(): number;
  /** Whether the writer checkpoints itself past the trigger (no checkpoint thread). */
  setInline(on: boolean): void;
}

/** On the writing connection: sets journal_size_limit and measures the WAL after each commit. */
export function createWalWatch(db: Database, file: string, maxBytes: number, inline: boolean): WalWatch {
  if (file === ':memory:' || file === '') return { afterCommit: () => 0, setInline: () => undefined };
  const wal = `${file}-wal`;
  const trigger = walTrigger(maxBytes);
  // A restarted WAL is cut to a quarter of the bound at its first commit.
  db.pragma(`journal_size_limit = ${Math.floor(maxBytes / 4)}`);
  let self = inline;
  return {
    afterCommit() {
      const size = statSync(wal, { throwIfNoEntry: false })?.size ?? 0;
      if (self && size >= trigger) {
        try {
          db.pragma('wal_checkpoint(PASSIVE)');
        } catch {
          // A checkpoint that cannot run now changes nothing committed; the next commit tries again.
        }
      }
      return size;
    },
    setInline(on) {
      self = on;
    },
  };
}

/**
 * On the request log's side: given the WAL size after a commit, says whether to hold the next
 * commit until `finish()` (the checkpoint thread's full pass, run once `settled` resolves) has
 * resolved. If a reader keeps the WAL from restarting, it holds again only after another eighth
 * of the bound, not after every commit.
 */
export function createWalGate(maxBytes: number, finish: () => Promise<void>): (walBytes: number, settled?: () => Promise<void>) => Promise<void> | null {
  const trigger = walTrigger(maxBytes);
  const step = Math.max(1, Math.floor(maxBytes / 8));
  let next = trigger;
  return (walBytes, settled) => {
    if (walBytes < trigger) {
      next = trigger;
      return null;
    }
    if (walBytes < next) return null;
    next = walBytes + step;
    // Commits already posted to the writer thread (up to four batches) go in first: a checkpoint
    // that ran beside them could not copy everything, and the WAL would not start again.
    return settled ? settled().then(finish) : finish();
  };
}
