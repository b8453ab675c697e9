import BetterSqlite3, { type Database } from 'better-sqlite3';
import { type ChainVerdict, type StoredRow, startChainWalk } from '../audit-verify.js';
import { maskUrl } from '../location.js';
import { readMigrations } from '../migrate.js';
import type { OutcomeRow } from '../outcome-chain.js';
import { type OutcomeChainVerdict, startOutcomeWalk } from '../outcomes-store.js';
import { type PoolClient, ServerError } from './pool.js';
import { connectServer } from './open.js';
import { verifyServerOutcomes } from './outcomes.js';
import { verifyServerChain } from './verify.js';

/** Why a log cannot be copied: said to the person running migrate-log. */
export class CopyRefusedError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'CopyRefusedError';
  }
}

export interface CopyOutcome {
  /** Rows copied per table. */
  rows: Record<string, number>;
  /** Nightly reports of a model and day given twice in the file: the first is kept. */
  duplicateNightlyReports: number;
  /** The chain as audit verify reads it from the server after the copy. */
  verdict: ChainVerdict;
  /** The outcome chain, likewise. */
  outcomes: OutcomeChainVerdict;
}

/** Scored rows read and written per statement. */
const CHUNK = 1000;

/** The tables copied as they are, in an order their references allow; scored_requests and outcomes apart. */
const TABLES = ['models', 'api_keys', 'retention_cuts', 'rejected_requests', 'drift_reports', 'alerts', 'outbox'] as const;
/** Tables whose seq the server numbers from a sequence: it goes on after the rows copied. */
const SEQUENCED = ['rejected_requests', 'drift_reports', 'alerts', 'outbox'] as const;

async function insertRows(client: PoolClient, file: string, table: string, columns: string[], rows: Array<Record<string, unknown>>, suffix = ''): Promise<number> {
  let written = 0;
  const per = Math.max(1, Math.floor(30_000 / columns.length));
  for (let at = 0; at < rows.length; at += per) {
    const values: unknown[] = [];
    const tuples: string[] = [];
    for (const r of rows.slice(at, at + per)) {
      const base = values.length;
      for (const c of columns) {
        const v = r[c];
        // SQLite text may hold a NUL (an old log's outcome source, say); PostgreSQL text cannot.
        if (typeof v === 'string' && v.includes('\u0000')) {
          throw new CopyRefusedError(`${file}: ${table} ${r.seq !== undefined ? `row ${String(r.seq)}` : 'a row'} holds a NUL character in ${c}, which PostgreSQL text cannot hold; nothing was copied. Change that value in the file (it is part of the chain: audit verify will then name the row) or leave the log on SQLite`);
        }
        values.push(v ?? null);
      }
      tuples.push(`(${columns.map((_, i) => `$${base + i + 1}`).join(', ')})`);
    }
    const res = await client.query(`INSERT INTO ${table} (${columns.join(', ')}) VALUES ${tuples.join(', ')} ${suffix}`, values);
    written += res.rowCount ?? 0;
  }
  return written;
}

async function serverColumns(client: PoolClient, table: string): Promise<Set<string>> {
  const r = await client.query<{ column_name: string }>('SELECT column_name FROM information_schema.columns WHERE table_schema = current_schema() AND table_name = $1', [table]);
  return new Set(r.rows.map((x) => x.column_name));
}

function checkSource(db: Database, file: string): void {
  const newest = readMigrations().at(-1)?.version ?? 0;
  const has = db.prepare("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'schema_migrations'").get() !== undefined;
  const version = has ? ((db.prepare('SELECT MAX(version) AS v FROM schema_migrations').get() as { v: number | null }).v ?? 0) : 0;
  if (version !== newest) {
    throw new CopyRefusedError(`${file} has schema version ${version}, this plumbline ${newest}: start this plumbline on it once (and stop it) to bring it up to date, then copy it`);
  }
}

/**
 * Copies an audit log from a SQLite file into an empty PostgreSQL database, in one transaction:
 * every table, scored rows and outcomes with their seq and chain hash unchanged. Each row's hash
 * is recomputed as it is copied (the walks of audit-verify.ts and outcomes-store.ts), and the
 * copy is refused, with nothing written, when either chain of the file is not intact or the
 * server already holds a log. The server's chain heads are set to the last rows, so that the
 * replicas chain on from them.
 */
export async function copySqliteLog(file: string, url: string, onProgress: (scored: number) => void = () => undefined): Promise<CopyOutcome> {
  const db = new BetterSqlite3(file, { readonly: true, fileMustExist: true });
  try {
    checkSource(db, file);
    const pool = await connectServer(url, { poolSize: 2 });
    try {
      const client = await pool.connect();
      const rows: Record<string, number> = {};
      let duplicateNightlyReports = 0;
      try {
        await client.query('BEGIN');
        // No replica may commit meanwhile: the head row stays locked until the copy commits.
        const head = (await client.query<{ seq: number }>('SELECT seq FROM chain_head WHERE id = 1 FOR UPDATE')).rows[0];
        const held = (await client.query<{ n: number }>('SELECT COUNT(*) AS n FROM scored_requests')).rows[0]?.n ?? 0;
        if ((head?.seq ?? 0) !== 0 || held > 0) throw new CopyRefusedError(`${maskUrl(url)} already holds an audit log (chain head at row ${head?.seq ?? 0}); copy into an empty database`);
        // Nor may a replica record outcomes meanwhile.
        const outcomeHead = (await client.query<{ seq: number }>('SELECT seq FROM outcome_chain_head WHERE id = 1 FOR UPDATE')).rows[0];
        const heldOutcomes = (await client.query<{ n: number }>('SELECT COUNT(*) AS n FROM outcomes')).rows[0]?.n ?? 0;
        if ((outcomeHead?.seq ?? 0) !== 0 || heldOutcomes > 0) throw new CopyRefusedError(`${maskUrl(url)} already holds outcomes (outcome chain head at ${outcomeHead?.seq ?? 0}); copy into an empty database`);
        for (const table of TABLES) {
          const columns = [...(await serverColumns(client, table))];
          const source = db.prepare(`SELECT * FROM ${table}`).all() as Array<Record<string, unknown>>;
          const present = columns.filter((c) => source.length === 0 || c in (source[0] as object));
          if (table === 'drift_reports') {
            const n = await insertRows(client, file, table, present, source, 'ON CONFLICT DO NOTHING');
            duplicateNightlyReports = source.length - n;
            rows[table] = n;
          } else rows[table] = await insertRows(client, file, table, present, source);
        }
        // The scored rows, in seq order, each checked against the chain before it is written.
        const cp = db.prepare('SELECT seq, chain_hash FROM retention_cuts ORDER BY seq DESC LIMIT 1').get() as { seq: number; chain_hash: Buffer } | undefined;
        const bySeq = db.prepare('SELECT * FROM scored_requests WHERE seq = ?');
        const walk = startChainWalk(cp, (seq) => bySeq.get(seq) as StoredRow | undefined);
        const columns = [...(await serverColumns(client, 'scored_requests'))];
        let chunk: StoredRow[] = [];
        let copied = 0;
        const flush = async (): Promise<void> => {
          copied += await insertRows(client, file, 'scored_requests', columns, chunk as unknown as Array<Record<string, unknown>>);
          chunk = [];
          onProgress(copied);
        };
        // Read a chunk at a time (the iterator cannot stay open across the awaits of the writes).
        let after = 0;
        for (;;) {
          const page = db.prepare('SELECT * FROM scored_requests WHERE seq > ? ORDER BY seq LIMIT ?').all(after, CHUNK) as StoredRow[];
          if (page.length === 0) break;
          for (const row of page) {
            const stop = walk.push(row);
            if (stop) throw new CopyRefusedError(`${file}: the hash chain is not intact (${stop.problem?.kind} at row ${stop.problem?.seq}: ${stop.problem?.detail}); nothing was copied. plumbline audit verify --db ${file} says more`);
            chunk.push(row);
          }
          after = (page[page.length - 1] as StoredRow).seq;
          await flush();
        }
        const end = walk.finish();
        rows.scored_requests = copied;
        await client.query('UPDATE chain_head SET seq = $1, hash = $2 WHERE id = 1', [end.head.seq, Buffer.from(end.head.hash, 'hex')]);
        // The outcomes, in seq order, each checked against their own chain before it is written.
        const outcomeWalk = startOutcomeWalk();
        const outcomeColumns = [...(await serverColumns(client, 'outcomes'))];
        let outcomesCopied = 0;
        let afterOutcome = 0;
        for (;;) {
          const page = db.prepare('SELECT * FROM outcomes WHERE seq > ? ORDER BY seq LIMIT ?').all(afterOutcome, CHUNK) as Array<OutcomeRow & { chain_hash: Buffer }>;
          if (page.length === 0) break;
          for (const row of page) {
            const stop = outcomeWalk.push(row);
            if (stop) throw new CopyRefusedError(`${file}: the outcome chain is not intact (${stop.problem?.kind} at outcome ${stop.problem?.seq}: ${stop.problem?.detail}); nothing was copied. plumbline audit verify --db ${file} says more`);
          }
          outcomesCopied += await insertRows(client, file, 'outcomes', outcomeColumns, page as unknown as Array<Record<string, unknown>>);
          afterOutcome = (page[page.length - 1] as OutcomeRow).seq;
        }
        rows.outcomes = outcomesCopied;
        const outcomeEnd = outcomeWalk.finish();
        await client.query('UPDATE outcome_chain_head SET seq = $1, hash = $2 WHERE id = 1', [outcomeEnd.head.seq, Buffer.from(outcomeEnd.head.hash, 'hex')]);
        for (const table of SEQUENCED) {
          await client.query(`SELECT setval(pg_get_serial_sequence('${table}', 'seq'), COALESCE((SELECT MAX(seq) FROM ${table}), 0) + 1, false)`);
        }
        await client.query('COMMIT');
      } catch (err) {
        await client.query('ROLLBACK').catch(() => undefined);
        client.release(err as Error);
        if (err instanceof CopyRefusedError) throw err;
        throw new ServerError(url, err);
      }
      client.release();
      return { rows, duplicateNightlyReports, verdict: await verifyServerChain(pool), outcomes: await verifyServerOutcomes(pool) };
    } finally {
      await pool.end();
    }
  } finally {
    db.close();
  }
}
