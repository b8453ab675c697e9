import pg from 'pg';
import { inject } from 'vitest';

/** The shared throwaway server's URL (test/helpers/postgres-global.ts), or null. */
export const serverUrl: string | null = inject('pgUrl');
/** Why the PostgreSQL suites skip; null when they run. */
export const serverMissing: string | null = inject('pgMissing');

let counter = 0;

/** The URL with another database name. */
export function withDatabase(url: string, name: string): string {
  const u = new URL(url);
  u.pathname = `/${name}`;
  return u.toString();
}

/** A new empty database on the shared server, for one test: its URL. */
export async function freshDatabase(url: string = serverUrl as string): Promise<string> {
  const name = `t_${process.pid}_${Date.now().toString(36)}_${counter++}`;
  const client = new pg.Client({ connectionString: url });
  await client.connect();
  try {
    // CREATE DATABASE cannot run inside a transaction block: a statement of its own.
    await client.query(`CREATE DATABASE ${name}`);
  } finally {
    await client.end();
  }
  return withDatabase(url, name);
}

/** Runs one query on a database: for checks on what the store wrote. */
export async function sql<T = Record<string, unknown>>(url: string, text: string, values: unknown[] = []): Promise<T[]> {
  const client = new pg.Client({ connectionString: url });
  await client.connect();
  try {
    return (await client.query(text, values)).rows as T[];
  } finally {
    await client.end();
  }
}
