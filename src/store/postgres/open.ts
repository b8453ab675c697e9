import type { ChainVerdict } from '../audit-verify.js';
import type { Coordination, Store } from '../contract.js';
import type { OutcomeChainVerdict } from '../outcomes-store.js';
import type { KeysStore } from '../keys-store.js';
import { maskUrl } from '../location.js';
import { MigrationError } from '../migrate.js';
import type { WriterOptions } from '../request-log.js';
import { createServerAlertsStore } from './alerts.js';
import { createServerDriftStore } from './drift.js';
import { createServerHealth } from './health.js';
import { createServerKeysStore } from './keys.js';
import { migrateServer } from './migrate.js';
import { createServerOutcomesStore, verifyServerOutcomes } from './outcomes.js';
import { type Pool, SERVER_DEFAULTS, ServerError, type ServerOptions, createPool, lockKey } from './pool.js';
import { createServerLog } from './request-log.js';
import { createServerRequestQuery, recordServerModel } from './requests.js';
import { createServerRetention } from './retention.js';
import { verifyServerChain } from './verify.js';

export type ServerStoreOptions = WriterOptions & Partial<Omit<ServerOptions, 'url'>> & {
  /** Hears what the pool reports of its idle connections (a server restart), password masked. */
  onPoolError?: (message: string) => void;
};

/**
 * Work for one replica at a time: a session advisory lock (pg_try_advisory_lock) held on a
 * connection of its own while the work runs. A replica that dies loses its session, and with it
 * the lock, so that another takes the work up at its next try.
 */
function serverCoordination(pool: Pool): Coordination {
  return {
    async exclusively(name, work) {
      const client = await pool.connect();
      const key = lockKey(name);
      let broken: Error | undefined;
      try {
        const got = (await client.query<{ got: boolean }>('SELECT pg_try_advisory_lock($1) AS got', [key])).rows[0]?.got === true;
        if (!got) return false;
        try {
          await work();
        } finally {
          await client.query('SELECT pg_advisory_unlock($1)', [key]).catch((err: Error) => (broken = err));
        }
        return true;
      } finally {
        client.release(broken);
      }
    },
  };
}

/** A pool on the server with its schema migrated (under the advisory lock). */
export async function connectServer(url: string, options: Partial<Omit<ServerOptions, 'url'>> & { onPoolError?: (message: string) => void }): Promise<Pool> {
  const pool = createPool({ url, ...SERVER_DEFAULTS, ...options }, options.onPoolError ?? (() => undefined));
  try {
    await migrateServer(pool, url);
    return pool;
  } catch (err) {
    await pool.end().catch(() => undefined);
    throw err instanceof MigrationError ? err : new ServerError(url, err);
  }
}

/**
 * The store on a PostgreSQL server, shared by every replica: the schema migrated at open (under
 * an advisory lock), the group-commit log on the one chain, and the same contract as SQLite's.
 */
export async function openServerStore(url: string, options: ServerStoreOptions): Promise<Store> {
  const pool = await connectServer(url, options);
  const health = createServerHealth(pool, url);
  const log = createServerLog(pool, url, options, { onStorage: (e) => health.record(e) });
  const requests = createServerRequestQuery(pool);
  let closed = false;
  return {
    kind: 'postgres',
    file: maskUrl(url),
    log,
    drift: createServerDriftStore(pool),
    alerts: createServerAlertsStore(pool),
    keys: createServerKeysStore(pool),
    outcomes: createServerOutcomesStore(pool, url),
    retention: createServerRetention(pool),
    coordination: serverCoordination(pool),
    verifyChain: (anchor) => verifyServerChain(pool, anchor),
    recordModel: (m) => recordServerModel(pool, m),
    queryRequests: (filter, limit, cursor) => requests.query(filter, limit, cursor),
    getRequest: (id) => requests.lookup(id),
    writeState: () => (closed ? { writable: false, reason: 'the store is closed' } : health.state()),
    checkpoints: () => null,
    headFile: null,
    async close() {
      if (closed) return;
      closed = true;
      log.close();
      await log.settle();
      await pool.end();
    },
  };
}

/** The keys table on a server, for `plumbline keys --db URL`: migrated first, like any start. */
export async function withServerKeys<T>(url: string, fn: (keys: KeysStore) => Promise<T>): Promise<T> {
  const pool = await connectServer(url, { poolSize: 2 });
  try {
    return await fn(createServerKeysStore(pool));
  } finally {
    await pool.end();
  }
}

/** audit verify --db URL: the chain, read from the server, without starting a store. */
export async function verifyServerLog(url: string, anchor?: Parameters<typeof verifyServerChain>[1]): Promise<Awaited<ReturnType<typeof verifyServerChain>>> {
  const pool = await connectServer(url, { poolSize: 2 });
  try {
    return await verifyServerChain(pool, anchor);
  } finally {
    await pool.end();
  }
}

/** audit verify --db URL: the scored rows' chain and the outcome chain, read from the server. */
export async function verifyServerAudit(url: string, anchor?: Parameters<typeof verifyServerChain>[1]): Promise<{ chain: ChainVerdict; outcomes: OutcomeChainVerdict }> {
  const pool = await connectServer(url, { poolSize: 2 });
  try {
    return { chain: await verifyServerChain(pool, anchor), outcomes: await verifyServerOutcomes(pool) };
  } finally {
    await pool.end();
  }
}
