import { join } from 'node:path';
import { MIGRATIONS_DIR, MigrationError, type Migration, readMigrations } from '../migrate.js';
import { maskUrl } from '../location.js';
import { type Pool, lockKey } from './pool.js';

/** migrations/postgres/NNN_name.sql, beside the SQLite ones. */
export const SERVER_MIGRATIONS_DIR = join(MIGRATIONS_DIR, 'postgres');

/**
 * Brings the server's schema to the newest: pending migrations each in a transaction, recorded in
 * schema_migrations, all under one session advisory lock, so that replicas starting together
 * wait for each other instead of racing (the second finds everything applied). The same refusals
 * as SQLite's runner: a schema from a newer plumbline, or an applied migration since edited.
 */
export async function migrateServer(pool: Pool, url: string, migrations: Migration[] = readMigrations(SERVER_MIGRATIONS_DIR)): Promise<{ applied: number[] }> {
  const client = await pool.connect();
  const key = lockKey('migrations');
  try {
    await client.query('SELECT pg_advisory_lock($1)', [key]);
    try {
      await client.query(`CREATE TABLE IF NOT EXISTS schema_migrations (
        version INTEGER PRIMARY KEY, name TEXT NOT NULL, sha256 TEXT NOT NULL, applied_at BIGINT NOT NULL)`);
      const done = (await client.query<{ version: number; name: string; sha256: string }>('SELECT version, name, sha256 FROM schema_migrations ORDER BY version')).rows;
      const newest = migrations.at(-1)?.version ?? 0;
      const ahead = done.filter((d) => d.version > newest);
      if (ahead.length > 0) {
        throw new MigrationError(
          `database ${maskUrl(url)} has schema version ${ahead.at(-1)?.version} (${ahead.at(-1)?.name}); this plumbline knows versions up to ${newest}. Run a newer plumbline, or restore a backup made by this one.`,
        );
      }
      for (const d of done) {
        const m = migrations.find((x) => x.version === d.version);
        if (m && m.sha256 !== d.sha256) throw new MigrationError(`database ${maskUrl(url)}: migration postgres/${String(d.version).padStart(3, '0')}_${d.name} was applied, but its file has changed since`);
      }
      const applied: number[] = [];
      for (const m of migrations) {
        if (done.some((d) => d.version === m.version)) continue;
        await client.query('BEGIN');
        try {
          await client.query(m.sql);
          await client.query('INSERT INTO schema_migrations (version, name, sha256, applied_at) VALUES ($1, $2, $3, $4)', [m.version, m.name, m.sha256, Date.now()]);
          await client.query('COMMIT');
        } catch (err) {
          await client.query('ROLLBACK').catch(() => undefined);
          throw err;
        }
        applied.push(m.version);
      }
      return { applied };
    } finally {
      await client.query('SELECT pg_advisory_unlock($1)', [key]).catch(() => undefined);
    }
  } finally {
    client.release();
  }
}
