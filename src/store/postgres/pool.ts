import { createHash } from 'node:crypto';
import pg from 'pg';
import { maskSecrets, maskUrl } from '../location.js';

export interface ServerOptions {
  /** postgres:// or postgresql:// URL, libpq's URI syntax. */
  url: string;
  /** postgres.pool_size. */
  poolSize: number;
  /** postgres.statement_timeout_ms. */
  statementTimeoutMs: number;
  /** postgres.connect_timeout_ms. */
  connectTimeoutMs: number;
}

export const SERVER_DEFAULTS = { poolSize: 10, statementTimeoutMs: 30_000, connectTimeoutMs: 5_000 } as const;

// BIGINT (int8) arrives as a string by default, since it may exceed 2^53; every BIGINT here is a
// Unix ms time, a count or a seq, all far below it.
const INT8 = 20;
const types = {
  getTypeParser: ((oid: number, format?: 'text' | 'binary') => (oid === INT8 && format !== 'binary' ? (v: string) => Number(v) : pg.types.getTypeParser(oid, format as 'text'))) as typeof pg.types.getTypeParser,
};

export type Pool = pg.Pool;
export type PoolClient = pg.PoolClient;

/**
 * A connection pool to the server. Idle connections that the server closes (a restart, a
 * failover) are dropped and replaced on the next query, so that the service recovers without a
 * restart of its own.
 */
export function createPool(o: ServerOptions, onError: (message: string) => void): pg.Pool {
  const pool = new pg.Pool({
    connectionString: o.url,
    max: o.poolSize,
    connectionTimeoutMillis: o.connectTimeoutMs,
    statement_timeout: o.statementTimeoutMs,
    idleTimeoutMillis: 30_000,
    application_name: 'plumbline',
    types,
  });
  // An idle connection lost emits here; without a listener it would end the process.
  pool.on('error', (err) => onError(maskSecrets(err.message, o.url)));
  // So does a connection lost while checked out between two queries (the server stopped under
  // a transaction): the query under way fails on its own, and the error event must not end
  // the process either.
  pool.on('connect', (client) => client.on('error', (err) => onError(maskSecrets(err.message, o.url))));
  return pool;
}

/** The server's error, with the URL and its password masked wherever the driver quoted them. */
export class ServerError extends Error {
  readonly code: string | undefined;
  constructor(url: string, cause: unknown) {
    const message = (cause as Error)?.message ?? String(cause);
    super(`${maskUrl(url)}: ${maskSecrets(message, url)}`);
    this.name = 'ServerError';
    this.code = (cause as { code?: string })?.code;
  }
}

/** SQLSTATE class 23: a constraint of one row's values, not a fault of the server. */
export const isConstraint = (err: unknown): boolean => String((err as { code?: string })?.code ?? '').startsWith('23');

/**
 * The advisory lock key of a name: the first 8 bytes of SHA-256("plumbline/" + name) as a signed
 * bigint, so that plumbline's locks do not collide with those of another application's numbers.
 */
export function lockKey(name: string): string {
  return createHash('sha256').update(`plumbline/${name}`).digest().readBigInt64BE(0).toString();
}
