import { mkdirSync } from 'node:fs';
import { dirname } from 'node:path';
import BetterSqlite3, { type Database } from 'better-sqlite3';
import { type Migration, migrate, readMigrations } from './migrate.js';

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
  if (file !== ':memory:') mkdirSync(dirname(file), { recursive: true });
  const db = new BetterSqlite3(file);
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
    throw err;
  }
  return db;
}
