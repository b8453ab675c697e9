import { hostname } from 'node:os';
import BetterSqlite3, { type Database } from 'better-sqlite3';

// One serving process per SQLite file. Two servers on one file lose nothing (every commit takes
// the write lock and reads the chain head inside it), but each would run the nightly reports,
// the retention job and the alert deliveries of its own (issue 19). The rule: a server holds an
// exclusive lock on a lock file beside the database for as long as it runs. The lock is a POSIX
// advisory lock taken through SQLite (BEGIN EXCLUSIVE on an empty database file, never
// committed); the kernel drops it when the process ends in any way, kill -9 included, so a lock
// is never stale: if it can be taken, nobody holds it. Who holds it is written in the database
// (serving_process), for the message the next one prints.
//
// The lock file must never be opened by other code of this process: closing any descriptor of a
// file drops every POSIX lock the process holds on it (fcntl(2)); SQLite's own bookkeeping only
// covers descriptors it opened.

/** Another process serves the database: exit 75 (EX_TEMPFAIL of sysexits.h, try again later). */
export class DatabaseHeldError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'DatabaseHeldError';
  }
}

export interface ServeLock {
  readonly path: string;
  /** Writes who serves into the database (serving_process). */
  announce(db: Database, version: string): void;
  release(): void;
}

export function lockFilePath(file: string): string {
  return `${file}.lock`;
}

/** Takes the serving lock of database `file`, or throws DatabaseHeldError naming who holds it. */
export function acquireServeLock(file: string): ServeLock {
  const path = lockFilePath(file);
  const lock = new BetterSqlite3(path, { timeout: 0 });
  try {
    lock.exec('BEGIN EXCLUSIVE');
  } catch (err) {
    lock.close();
    if ((err as { code?: string }).code === 'SQLITE_BUSY') throw new DatabaseHeldError(heldMessage(file));
    throw err;
  }
  return {
    path,
    announce(db, version) {
      db.prepare(
        `INSERT INTO serving_process (id, pid, host, version, started_at) VALUES (1, ?, ?, ?, ?)
         ON CONFLICT (id) DO UPDATE SET pid = excluded.pid, host = excluded.host, version = excluded.version, started_at = excluded.started_at`,
      ).run(process.pid, hostname(), version, Date.now());
    },
    release() {
      if (lock.open) lock.close();
    },
  };
}

function heldMessage(file: string): string {
  const who = readHolder(file);
  const by = who ? `plumbline ${who.version} (pid ${who.pid} on ${who.host}, since ${new Date(who.started_at).toISOString()})` : 'another plumbline process';
  return (
    `${file} is already served by ${by}. Two servers on one SQLite file would each run the nightly reports, ` +
    `retention and alert deliveries. Stop that one first (its lock goes when it ends, however it ends), or give this one another --db`
  );
}

function readHolder(file: string): { pid: number; host: string; version: string; started_at: number } | null {
  try {
    const db = new BetterSqlite3(file, { readonly: true, fileMustExist: true, timeout: 250 });
    try {
      return (db.prepare('SELECT pid, host, version, started_at FROM serving_process WHERE id = 1').get() as { pid: number; host: string; version: string; started_at: number } | undefined) ?? null;
    } finally {
      db.close();
    }
  } catch {
    // A database from before migration 006, or one that cannot be read: the message says less.
    return null;
  }
}
