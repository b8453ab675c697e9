import type { ModelRecord } from '../models-table.js';
import { OUTCOME_GENESIS, type OutcomeRow } from '../outcome-chain.js';
import {
  type CurrentOutcome,
  type LabelledRowView,
  type LoggedVectorView,
  type OutcomeChainVerdict,
  type OutcomeInput,
  type OutcomeRefusal,
  type OutcomeVerdict,
  type OutcomesStore,
  nextOutcome,
  lookupRefusal,
  notAClassDetail,
  startOutcomeWalk,
  tagPairs,
  tagWhich,
} from '../outcomes-store.js';
import { cursorPages } from './drift.js';
import { type Pool, type PoolClient, ServerError } from './pool.js';
import { carries, pairText } from './tag-match.js';
import { serverModelCache } from './requests.js';

/** Outcome rows per INSERT statement: 9 parameters a row, under the protocol's 65,535. */
const ROWS_PER_INSERT = 2000;
/** Rows a tag lookup reads at a time while it looks for two that carry the tag. */
const TAG_PAGE = 64;

const COLUMNS = ['seq', 'request_id', 'label', 'observed_at', 'source', 'recorded_at', 'key_label', 'replaces', 'chain_hash'] as const;

// PostgreSQL's text cannot hold the NUL character: a value with one is not sent to the server. No
// logged answer can carry such a request id or model name, so the lookup refuses it as SQLite's
// finds nothing; a tag's keys and values are only ever sent as JSON text, where NUL is escaped.
const hasNul = (s: string): boolean => s.includes('\u0000');

const NEWEST = 'SELECT o.label FROM outcomes AS o WHERE o.request_id = s.request_id ORDER BY o.seq DESC LIMIT 1';

type Target = { request_id: string; model_sha256: string; model_name: string };


/**
 * The answer an item names, read on the server: by request id, or by tag, where the JSON text
 * of each pair (as JSON.stringify wrote the tags) narrows the rows in SQL and the parsed tags
 * decide; pages in seq order until two answers carry it (then it is ambiguous).
 */
async function findTarget(client: PoolClient, item: OutcomeInput): Promise<Target | OutcomeRefusal> {
  if (item.requestId !== undefined) {
    if (hasNul(item.requestId)) return lookupRefusal.unknownRequest(item.requestId);
    const t = (await client.query<Target>('SELECT request_id, model_sha256, model_name FROM scored_requests WHERE request_id = $1', [item.requestId])).rows[0];
    return t ?? lookupRefusal.unknownRequest(item.requestId);
  }
  const pairs = tagPairs(item.tag);
  const which = tagWhich(pairs, item.model);
  if (item.model !== undefined && hasNul(item.model)) return lookupRefusal.unknownTag(which);
  const args: unknown[] = [];
  const arg = (v: unknown): string => `$${args.push(v)}`;
  const where = ['tags IS NOT NULL'];
  if (item.model !== undefined) where.push(`model_name = ${arg(item.model)}`);
  for (const [k, v] of pairs) where.push(`strpos(tags, ${arg(pairText(k, v))}) > 0`);
  const after = arg(0);
  const sql = `SELECT seq, request_id, model_sha256, model_name, tags FROM scored_requests WHERE ${where.join(' AND ')} AND seq > ${after} ORDER BY seq LIMIT ${TAG_PAGE}`;
  const hits: Target[] = [];
  for (;;) {
    const page = (await client.query<Target & { seq: number; tags: string }>(sql, args)).rows;
    for (const r of page) {
      if (carries(r.tags, pairs)) hits.push({ request_id: r.request_id, model_sha256: r.model_sha256, model_name: r.model_name });
      if (hits.length > 1) return lookupRefusal.ambiguousTag(which);
    }
    if (page.length < TAG_PAGE) break;
    args[args.length - 1] = (page[page.length - 1] as { seq: number }).seq;
  }
  return hits[0] ?? lookupRefusal.unknownTag(which);
}

/** One INSERT of outcome rows that also moves the head, only if every row went in. */
function insertStatement(rows: Array<OutcomeRow & { chain_hash: Buffer }>, head: { seq: number; hash: Buffer }): { text: string; values: unknown[] } {
  const values: unknown[] = [];
  const tuples: string[] = [];
  for (const r of rows) {
    const at = values.length;
    values.push(r.seq, r.request_id, r.label, r.observed_at, r.source, r.recorded_at, r.key_label, r.replaces, r.chain_hash);
    tuples.push(`(${COLUMNS.map((_, i) => `$${at + i + 1}`).join(', ')})`);
  }
  const n = values.length;
  values.push(head.seq, head.hash);
  return {
    text: `WITH ins AS (INSERT INTO outcomes (${COLUMNS.join(', ')}) VALUES ${tuples.join(', ')} RETURNING 1)
      UPDATE outcome_chain_head SET seq = $${n + 1}, hash = $${n + 2} WHERE id = 1 AND (SELECT COUNT(*) FROM ins) = ${rows.length}`,
    values,
  };
}

/**
 * Outcomes on a PostgreSQL server, with the answers of the SQLite store (outcomes-store.ts). A
 * batch is one transaction that first locks the outcome chain's head row (FOR UPDATE), so that
 * the batches of every replica join one chain in commit order and each sees the outcomes the
 * batches before it recorded; the head moves in the statement that inserts the rows.
 */
export function createServerOutcomesStore(pool: Pool, url: string): OutcomesStore {
  const models = serverModelCache();
  const one = async <T>(sql: string, values: unknown[]): Promise<T | undefined> => (await pool.query(sql, values)).rows[0] as T | undefined;

  const record = async (items: OutcomeInput[], keyLabel: string | null, now: number): Promise<OutcomeVerdict[]> => {
    // The server's errors with the URL's password masked, wherever the driver quoted it.
    const client = await pool.connect().catch((err: unknown) => {
      throw new ServerError(url, err);
    });
    let broken: Error | undefined;
    try {
      // Which answer each item names, and its model's classes, are read before the lock: the
      // lock guards the outcome chain, not the scored rows, so a batch of tag lookups does not
      // hold up every other replica's outcomes.
      const found: Array<{ item: OutcomeInput; target: Target } | { verdict: OutcomeVerdict }> = [];
      for (const item of items) {
        const target = await findTarget(client, item);
        if ('reason' in target) {
          found.push({ verdict: { requestId: item.requestId ?? null, status: 'refused', ...target } });
          continue;
        }
        const classes = (await models(client, target.model_sha256))?.classes ?? [];
        if (!classes.includes(item.label)) found.push({ verdict: { requestId: target.request_id, status: 'refused', reason: 'not-a-class', detail: notAClassDetail(item.label, target.model_name, classes), classes } });
        else found.push({ item, target });
      }
      const [, headResult] = (await client.query('BEGIN; SELECT seq, hash FROM outcome_chain_head WHERE id = 1 FOR UPDATE')) as unknown as [unknown, { rows: Array<{ seq: number; hash: Buffer }> }];
      const h = headResult.rows[0];
      if (!h) throw new Error("the outcome_chain_head row is missing: the schema is not plumbline's");
      let at = { seq: h.seq, hash: h.hash };
      const start = { ...at };
      const rows: Array<OutcomeRow & { chain_hash: Buffer }> = [];
      // The newest outcome of each answer met, read under the lock in one query, as this batch
      // leaves it (a later item sees an earlier one).
      const ids = [...new Set(found.flatMap((f) => ('target' in f ? [f.target.request_id] : [])))];
      const newest = new Map<string, { seq: number; label: string } | null>(ids.map((id) => [id, null]));
      if (ids.length > 0) {
        const latest = await client.query<{ request_id: string; seq: number; label: string }>(
          'SELECT DISTINCT ON (request_id) request_id, seq, label FROM outcomes WHERE request_id = ANY($1::text[]) ORDER BY request_id, seq DESC',
          [ids],
        );
        for (const r of latest.rows) newest.set(r.request_id, { seq: r.seq, label: r.label });
      }
      const verdicts: OutcomeVerdict[] = [];
      for (const f of found) {
        if ('verdict' in f) {
          verdicts.push(f.verdict);
          continue;
        }
        const next = nextOutcome(f.item, f.target.request_id, newest.get(f.target.request_id), at, now, keyLabel);
        if (next.row) {
          rows.push(next.row);
          at = { seq: next.row.seq, hash: next.row.chain_hash };
          newest.set(next.row.request_id, { seq: next.row.seq, label: next.row.label });
        }
        verdicts.push(next.verdict);
      }
      let head = start;
      for (let i = 0; i < rows.length; i += ROWS_PER_INSERT) {
        const chunk = rows.slice(i, i + ROWS_PER_INSERT);
        const last = chunk[chunk.length - 1] as OutcomeRow & { chain_hash: Buffer };
        head = { seq: last.seq, hash: last.chain_hash };
        const s = insertStatement(chunk, head);
        if ((await client.query(s.text, s.values)).rowCount !== 1) throw new Error('the outcome chain head did not move with the rows');
      }
      await client.query('COMMIT');
      return verdicts;
    } catch (err) {
      broken = err as Error;
      await client.query('ROLLBACK').catch(() => undefined);
      throw new ServerError(url, err);
    } finally {
      // A connection whose transaction failed is not reused.
      client.release(broken);
    }
  };

  return {
    record: (items, keyLabel, now = Date.now()) => record(items, keyLabel, now),
    async current(requestIds) {
      const out = new Map<string, CurrentOutcome>();
      if (requestIds.length === 0) return out;
      const rows = (
        await pool.query<{ request_id: string; label: string; observed_at: number | null }>(
          'SELECT DISTINCT ON (request_id) request_id, label, observed_at FROM outcomes WHERE request_id = ANY($1::text[]) ORDER BY request_id, seq DESC',
          [requestIds.filter((id) => !hasNul(id))],
        )
      ).rows;
      for (const r of rows) out.set(r.request_id, { label: r.label, observed_at: r.observed_at });
      return out;
    },
    async windowOutcomes(model, from, to) {
      if (hasNul(model)) return { scored: 0, labelled: 0, right: 0 };
      const r = await one<{ scored: number; labelled: number; right: number }>(
        `SELECT COUNT(*) AS scored, COUNT(actual) AS labelled, COALESCE(SUM(CASE WHEN actual = label THEN 1 ELSE 0 END), 0)::bigint AS "right" FROM
         (SELECT s.label, (${NEWEST}) AS actual FROM scored_requests AS s WHERE s.model_name = $1 AND s.received_at >= $2 AND s.received_at < $3) AS w`,
        [model, from, to],
      );
      return r ?? { scored: 0, labelled: 0, right: 0 };
    },
    countScored: async (sha256, from, to) => (await one<{ n: number }>('SELECT COUNT(*) AS n FROM scored_requests WHERE model_sha256 = $1 AND received_at >= $2 AND received_at < $3', [sha256, from, to]))?.n ?? 0,
    labelledRows: (sha256, from, to) =>
      cursorPages<LabelledRowView>(
        pool,
        `SELECT received_at, label, probabilities, margin, in_domain, review, actual FROM (SELECT s.received_at, s.seq, s.label, s.probabilities, s.margin, s.in_domain, s.review, (${NEWEST}) AS actual
         FROM scored_requests AS s WHERE s.model_sha256 = $1 AND s.received_at >= $2 AND s.received_at < $3) AS w WHERE actual IS NOT NULL ORDER BY received_at, seq`,
        [sha256, from, to],
      ),
    loggedVectors: (model, from, to, labelledOnly) =>
      cursorPages<LoggedVectorView>(
        pool,
        `SELECT request_id, received_at, model_sha256, features, label, in_domain, actual FROM (SELECT s.request_id, s.received_at, s.seq, s.model_sha256, s.features, s.label, s.in_domain, (${NEWEST}) AS actual
         FROM scored_requests AS s WHERE s.model_name = $1 AND s.received_at >= $2 AND s.received_at < $3) AS w${labelledOnly ? ' WHERE actual IS NOT NULL' : ''} ORDER BY received_at, seq`,
        [model, from, to],
      ),
    async latestModel(name): Promise<ModelRecord | null> {
      if (hasNul(name)) return null;
      const m = await one<{ sha256: string }>('SELECT sha256 FROM models WHERE name = $1 ORDER BY last_loaded_at DESC, first_loaded_at DESC LIMIT 1', [name]);
      return m ? models(pool, m.sha256) : null;
    },
    describeModel: (sha256) => (hasNul(sha256) ? null : models(pool, sha256)),
    verifyChain: () => verifyServerOutcomes(pool),
  };
}

/**
 * Recomputes the outcome chain on the server from the genesis, over the rows read in seq order
 * from a server-side cursor, with the walk SQLite's uses. The head row, read first, must be among
 * them with its hash: outcomes cut from the end are told too (rows committed after it was read
 * may follow it).
 */
export async function verifyServerOutcomes(pool: Pool): Promise<OutcomeChainVerdict> {
  const head = (await pool.query<{ seq: number; hash: Buffer }>('SELECT seq, hash FROM outcome_chain_head WHERE id = 1')).rows[0] ?? { seq: 0, hash: OUTCOME_GENESIS };
  const walk = startOutcomeWalk();
  let atHead: Buffer | null = head.seq === 0 ? OUTCOME_GENESIS : null;
  for await (const rows of cursorPages<OutcomeRow & { chain_hash: Buffer }>(pool, 'SELECT * FROM outcomes ORDER BY seq', [])) {
    for (const row of rows) {
      const stop = walk.push(row);
      if (stop) return stop;
      if (row.seq === head.seq) atHead = row.chain_hash;
    }
  }
  const end = walk.finish();
  if (end.head.seq < head.seq) {
    const gap = head.seq - 1 === end.head.seq ? `outcome ${head.seq} is missing` : `outcomes ${end.head.seq + 1} to ${head.seq} are missing`;
    return { ...end, intact: false, problem: { kind: 'removed', seq: end.head.seq + 1, request_id: null, detail: `${gap}: the outcome chain's head row is at ${head.seq}, its last row at ${end.head.seq}` } };
  }
  if (atHead !== null && !atHead.equals(head.hash)) {
    return { ...end, intact: false, problem: { kind: 'changed', seq: head.seq, request_id: null, detail: `outcome ${head.seq} does not have the chain hash the outcome chain's head row recorded for it: the rows up to it were rewritten` } };
  }
  return end;
}
