import { mkdirSync } from 'node:fs';
import { dirname } from 'node:path';
import BetterSqlite3, { type Database } from 'better-sqlite3';
import { type Migration, migrate, readMigrations } from './migrate.js';

/**
 * The database cannot be written: a read-only or immutable file or directory, a read-only file
 * system, a full disk. One line for the terminal; exit 73 (EX_CANTCREAT of sysexits.h: the
 * output file cannot be written).
 */
export class DatabaseUnwritableError extends Error {
  constructor(
    readonly file: string,
    cause: unknown,
  ) {
    super(
      `cannot write the audit log ${file}: ${describeCause(cause)}. plumbline must write every answer to it. ` +
        `Check that the file, its -wal and -shm files and their directory are writable by this user and not immutable (lsattr), ` +
        `that the file system is mounted read-write and has space, or give another --db`,
      { cause },
    );
    this.name = 'DatabaseUnwritableError';
  }
}

function describeCause(err: unknown): string {
  const code = (err as { code?: string }).code;
  const message = (err as Error).message ?? String(err);
  return code ? `${message} (${code})` : message;
}

/** Whether an error from SQLite or the file system means the database cannot be written here. */
export function isUnwritable(err: unknown): boolean {
  const code = (err as { code?: string }).code ?? '';
  return /^SQLITE_(READONLY|CANTOPEN|PERM|FULL|IOERR|AUTH)/.test(code) || ['EACCES', 'EPERM', 'EROFS', 'ENOSPC'].includes(code);
}

export interface OpenOptions {
  /** "normal": a commit survives a process crash (WAL); "full": also a power loss. */
  sync: 'normal' | 'full';
  migrations?: Migration[];
}

/**
 * Opens (creating when missing) the database in WAL mode and migrates it. WAL with
 * synchronous=NORMAL keeps every committed transaction across a crash of the process; only a
 * power loss can take the last ones, which synchronous=FULL prevents at the cost of an fsync
 * per commit (SQLite documentation, "Write-Ahead Logging" and PRAGMA synchronous).
 */
export function openDatabase(file: string, options: OpenOptions): Database {
  let db: Database;
  try {
    if (file !== ':memory:') mkdirSync(dirname(file), { recursive: true });
    db = new BetterSqlite3(file);
  } catch (err) {
    throw isUnwritable(err) ? new DatabaseUnwritableError(file, err) : err;
  }
  try {
    db.pragma('journal_mode = WAL');
    db.pragma(`synchronous = ${options.sync === 'full' ? 'FULL' : 'NORMAL'}`);
    db.pragma('foreign_keys = ON');
    // Short: a writer may run on the event loop, and another process holding the write lock (a
    // backup, a shell) must not stall every request for long; the request fails with 503 instead.
    db.pragma('busy_timeout = 250');
    migrate(db, options.migrations ?? readMigrations(), file);
  } catch (err) {
    db.close();
    throw isUnwritable(err) ? new DatabaseUnwritableError(file, err) : err;
  }
  return db;
}
