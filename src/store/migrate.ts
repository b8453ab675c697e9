import { createHash } from 'node:crypto';
import { readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { Database } from 'better-sqlite3';

/** migrations/ at the package root: two levels above both src/store and dist/store. */
export const MIGRATIONS_DIR = fileURLToPath(new URL('../../migrations/', import.meta.url));

export interface Migration {
  version: number;
  name: string;
  sql: string;
  sha256: string;
}

export class MigrationError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'MigrationError';
  }
}

/** Reads migrations/NNN_name.sql in version order; versions must be unique. */
export function readMigrations(dir: string = MIGRATIONS_DIR): Migration[] {
  const out: Migration[] = [];
  for (const file of readdirSync(dir).sort()) {
    const m = /^(\d{3})_([a-z0-9_]+)\.sql$/.exec(file);
    if (!m) continue;
    const sql = readFileSync(join(dir, file), 'utf8');
    out.push({ version: Number(m[1]), name: m[2] as string, sql, sha256: createHash('sha256').update(sql).digest('hex') });
  }
  out.forEach((mig, i) => {
    if (i > 0 && mig.version === (out[i - 1] as Migration).version) throw new MigrationError(`two migrations have version ${mig.version}`);
  });
  return out;
}

/**
 * Brings the database to the newest schema: each pending migration runs in its own transaction
 * and is recorded in schema_migrations. A database from a newer plumbline is refused rather
 * than written to, and so is one whose applied migration was edited afterwards.
 */
export function migrate(db: Database, migrations: Migration[], file: string): { applied: number[] } {
  db.exec(`CREATE TABLE IF NOT EXISTS schema_migrations (
    version INTEGER PRIMARY KEY, name TEXT NOT NULL, sha256 TEXT NOT NULL, applied_at INTEGER NOT NULL) STRICT`);
  const done = db.prepare('SELECT version, name, sha256 FROM schema_migrations ORDER BY version').all() as Array<{ version: number; name: string; sha256: string }>;
  const newest = migrations.at(-1)?.version ?? 0;
  const ahead = done.filter((d) => d.version > newest);
  if (ahead.length > 0) {
    throw new MigrationError(
      `database ${file} has schema version ${ahead.at(-1)?.version} (${ahead.at(-1)?.name}); this plumbline knows versions up to ${newest}. Run a newer plumbline, or restore a backup made by this one.`,
    );
  }
  for (const d of done) {
    const m = migrations.find((x) => x.version === d.version);
    if (m && m.sha256 !== d.sha256) throw new MigrationError(`database ${file}: migration ${String(d.version).padStart(3, '0')}_${d.name} was applied, but its file has changed since`);
  }
  const record = db.prepare('INSERT INTO schema_migrations (version, name, sha256, applied_at) VALUES (?, ?, ?, ?)');
  const applied: number[] = [];
  for (const m of migrations) {
    if (done.some((d) => d.version === m.version)) continue;
    db.transaction(() => {
      db.exec(m.sql);
      record.run(m.version, m.name, m.sha256, Date.now());
    })();
    applied.push(m.version);
  }
  return { applied };
}
