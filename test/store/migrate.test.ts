import BetterSqlite3 from 'better-sqlite3';
import { afterEach, describe, expect, it } from 'vitest';
import { openDatabase } from '../../src/store/database.js';
import { type Migration, MigrationError, migrate, readMigrations } from '../../src/store/migrate.js';
import { tempDir } from '../helpers/datasets.js';

const tmp = tempDir();
afterEach(() => undefined);

const mig = (version: number, name: string, sql: string): Migration => ({ version, name, sql, sha256: `${version}-${sql.length}` });

describe('migrations', () => {
  it('apply migrations/NNN_name.sql in order and record each in schema_migrations', () => {
    const file = tmp.file('m1.db');
    const db = openDatabase(file, { sync: 'normal' });
    const recorded = db.prepare('SELECT version, name FROM schema_migrations ORDER BY version').all();
    expect(recorded).toEqual(readMigrations().map((m) => ({ version: m.version, name: m.name })));
    expect(db.prepare("SELECT name FROM sqlite_master WHERE type = 'table' AND name = 'scored_requests'").get()).toBeDefined();
    expect(db.pragma('journal_mode', { simple: true })).toBe('wal');
    db.close();
  });

  it('set synchronous=NORMAL by default and FULL for log.sync "full"', () => {
    const normal = openDatabase(tmp.file('s1.db'), { sync: 'normal' });
    const full = openDatabase(tmp.file('s2.db'), { sync: 'full' });
    // PRAGMA synchronous reads back 1 for NORMAL and 2 for FULL (SQLite documentation)
    expect(normal.pragma('synchronous', { simple: true })).toBe(1);
    expect(full.pragma('synchronous', { simple: true })).toBe(2);
    normal.close();
    full.close();
  });

  it('apply nothing twice when the database is opened again', () => {
    const file = tmp.file('m2.db');
    openDatabase(file, { sync: 'normal' }).close();
    const db = new BetterSqlite3(file);
    expect(migrate(db, readMigrations(), file).applied).toEqual([]);
    db.close();
  });

  it('roll a failing migration back whole, leaving the database at the version before', () => {
    const db = new BetterSqlite3(':memory:');
    const good = mig(1, 'first', 'CREATE TABLE a (x INTEGER);');
    const bad = mig(2, 'second', 'CREATE TABLE b (y INTEGER); INSERT INTO nowhere VALUES (1);');
    expect(() => migrate(db, [good, bad], 'mem')).toThrow(/no such table: nowhere/);
    const tables = (db.prepare("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name").all() as Array<{ name: string }>).map((t) => t.name);
    expect(tables).toEqual(['a', 'schema_migrations']);
    expect(db.prepare('SELECT version FROM schema_migrations').all()).toEqual([{ version: 1 }]);
    db.close();
  });

  it('refuse a database from a newer version, saying what to do', () => {
    const db = new BetterSqlite3(':memory:');
    migrate(db, [mig(1, 'first', 'SELECT 1;'), mig(2, 'second', 'SELECT 1;')], 'var/plumbline.db');
    expect(() => migrate(db, [mig(1, 'first', 'SELECT 1;')], 'var/plumbline.db')).toThrow(MigrationError);
    expect(() => migrate(db, [mig(1, 'first', 'SELECT 1;')], 'var/plumbline.db')).toThrow(
      /database var\/plumbline\.db has schema version 2 \(second\); this plumbline knows versions up to 1\. Run a newer plumbline/,
    );
    db.close();
  });

  it('refuse a database whose applied migration file was edited afterwards', () => {
    const db = new BetterSqlite3(':memory:');
    migrate(db, [mig(1, 'first', 'SELECT 1;')], 'x.db');
    expect(() => migrate(db, [{ ...mig(1, 'first', 'SELECT 1;'), sha256: 'changed' }], 'x.db')).toThrow(/migration 001_first was applied, but its file has changed since/);
    db.close();
  });
  it('keep the retention cuts a log wrote before migration 010 renamed their table', () => {
    const db = new BetterSqlite3(':memory:');
    const all = readMigrations();
    migrate(db, all.filter((m) => m.version < 10), 'old.db');
    db.prepare('INSERT INTO chain_checkpoints (seq, chain_hash, created_at, rows_removed) VALUES (?, ?, ?, ?)').run(12, Buffer.alloc(32, 7), 1, 12);
    expect(migrate(db, all, 'old.db').applied).toContain(10);
    expect(db.prepare('SELECT seq, hex(chain_hash) AS hash, rows_removed FROM retention_cuts').all()).toEqual([{ seq: 12, hash: '07'.repeat(32), rows_removed: 12 }]);
    expect(db.prepare("SELECT name FROM sqlite_master WHERE name = 'chain_checkpoints'").get()).toBeUndefined();
    db.close();
  });
});
