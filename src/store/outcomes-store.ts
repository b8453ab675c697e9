import type { Database, Statement } from 'better-sqlite3';
import type { Awaitable, Sync } from './awaitable.js';
import { OUTCOME_GENESIS, type OutcomeRow, outcomeHash } from './outcome-chain.js';
import { type ModelRecord, createModelCache } from './models-table.js';

/** One item of POST /v1/outcomes, checked for shape already. */
export interface OutcomeInput {
  /** The answer it judges, by request id ... */
  requestId?: string;
  /** ... or by the tags the line sent when scoring: every pair must match, exactly one answer. */
  tag?: Record<string, string>;
  /** With a tag: only answers of this model. */
  model?: string;
  label: string;
  /** Unix ms. */
  observedAt: number | null;
  source: string | null;
  /** Record a different label over one recorded before. */
  replace: boolean;
}

/** Why an item was refused; the route turns each into a problem. */
export type OutcomeRefusal =
  | { reason: 'unknown-request'; detail: string }
  | { reason: 'unknown-tag'; detail: string }
  | { reason: 'ambiguous-tag'; detail: string }
  | { reason: 'not-a-class'; detail: string; classes: string[] }
  | { reason: 'conflict'; detail: string; recorded: string };

export type OutcomeVerdict =
  | { requestId: string; status: 'recorded' | 'unchanged' }
  | ({ requestId: string | null; status: 'refused' } & OutcomeRefusal);

/** The outcome of an answer as GET /v1/requests shows it. */
export interface CurrentOutcome {
  label: string;
  /** Unix ms or null. */
  observed_at: number | null;
}

/** A labelled answer as the outcomes report reads it. */
export interface LabelledRowView {
  received_at: number;
  label: string;
  probabilities: Buffer;
  margin: number;
  in_domain: number;
  review: number;
  actual: string;
}

/** A logged answer as export and compare read it: the vector still packed, the outcome if any. */
export interface LoggedVectorView {
  request_id: string;
  received_at: number;
  model_sha256: string;
  features: Buffer;
  label: string;
  in_domain: number;
  actual: string | null;
}

export interface OutcomeChainVerdict {
  intact: boolean;
  rows: number;
  head: { seq: number; hash: string };
  problem: { kind: 'changed' | 'removed' | 'inserted'; seq: number; request_id: string | null; detail: string } | null;
}

/**
 * Outcomes: recorded in one transaction per batch, read by the requests listing, the report,
 * export and compare. SQLite answers at once; a server (postgres/outcomes.ts) with promises, and
 * streams its rows in pages from a server-side cursor.
 */
export interface OutcomesStore {
  /**
   * Records a batch in one transaction: each item is recorded, unchanged or refused, in order
   * (a later item sees an earlier one), and a failure of the transaction records none of them.
   */
  record(items: OutcomeInput[], keyLabel: string | null, now?: number): Awaitable<OutcomeVerdict[]>;
  /** The newest outcome of each of these answers that has one. */
  current(requestIds: readonly string[]): Awaitable<Map<string, CurrentOutcome>>;
  /** Answers of a model (every bundle of it) received in [from, to): all, those with an outcome, those whose label was it. */
  windowOutcomes(model: string, from: number, to: number): Awaitable<{ scored: number; labelled: number; right: number }>;
  /** Answers of one bundle in [from, to). */
  countScored(sha256: string, from: number, to: number): Awaitable<number>;
  /** Answers of one bundle in [from, to) that have an outcome, with the newest, oldest first: one at a time (SQLite) or in pages (a server). */
  labelledRows(sha256: string, from: number, to: number): Iterable<LabelledRowView> | AsyncIterable<LabelledRowView[]>;
  /** Answers of a model (every bundle of it) in [from, to), oldest first; only labelled ones with `labelledOnly`. */
  loggedVectors(model: string, from: number, to: number, labelledOnly: boolean): Iterable<LoggedVectorView> | AsyncIterable<LoggedVectorView[]>;
  /** The bundle of a model loaded last (as the drift reports take it). */
  latestModel(name: string): Awaitable<ModelRecord | null>;
  /** A bundle the log holds, by its sha256: its features in vector order and classes in probability order. */
  describeModel(sha256: string): Awaitable<ModelRecord | null>;
  /** Recomputes the outcome chain from the genesis. */
  verifyChain(): Awaitable<OutcomeChainVerdict>;
}

/** The SQLite outcomes store: the same contract answered synchronously, rows one at a time. */
export type SqliteOutcomesStore = Sync<OutcomesStore> & {
  labelledRows(sha256: string, from: number, to: number): IterableIterator<LabelledRowView>;
  loggedVectors(model: string, from: number, to: number, labelledOnly: boolean): IterableIterator<LoggedVectorView>;
};

/**
 * What an item does to its answer's outcomes, given the newest one recorded (an earlier item of
 * the same batch included): nothing when the label is the same, a conflict unless `replace`, else
 * the row that chains after `at`, with its hash. Both stores decide with this.
 */
export function nextOutcome(
  item: OutcomeInput,
  requestId: string,
  before: { seq: number; label: string } | null | undefined,
  at: { seq: number; hash: Buffer },
  now: number,
  keyLabel: string | null,
): { verdict: OutcomeVerdict; row?: OutcomeRow & { chain_hash: Buffer } } {
  if (before?.label === item.label) return { verdict: { requestId, status: 'unchanged' } };
  if (before && !item.replace) {
    return { verdict: { requestId, status: 'refused', reason: 'conflict', detail: conflictDetail(requestId, before.label, item.label), recorded: before.label } };
  }
  const row: OutcomeRow = {
    seq: at.seq + 1,
    request_id: requestId,
    label: item.label,
    observed_at: item.observedAt,
    source: item.source,
    recorded_at: now,
    key_label: keyLabel,
    replaces: before?.seq ?? null,
  };
  return { verdict: { requestId, status: 'recorded' }, row: { ...row, chain_hash: outcomeHash(at.hash, row) } };
}

/** The text of a refused conflict, the same on either store. */
export const conflictDetail = (requestId: string, recorded: string, label: string): string =>
  `request ${requestId} already has the outcome ${JSON.stringify(recorded)}; send "replace": true to record ${JSON.stringify(label)} over it`;

/** The text of a label that is not a class of the answer's model. */
export const notAClassDetail = (label: string, model: string, classes: readonly string[]): string =>
  `${JSON.stringify(label)} is not a class of ${model}, whose classes are ${classes.join(', ')}`;

/** How a tag item names what it looked for, in the refusals. */
export const tagWhich = (pairs: ReadonlyArray<readonly [string, string]>, model: string | undefined): string =>
  `${pairs.map(([k, v]) => `${k}=${JSON.stringify(v)}`).join(', ')}${model !== undefined ? ` of model ${JSON.stringify(model)}` : ''}`;

/** The refusals of a lookup by request id or by tag, the same on either store. */
export const lookupRefusal = {
  unknownRequest: (id: string): OutcomeRefusal => ({ reason: 'unknown-request', detail: `no logged answer has the request id ${JSON.stringify(id)}` }),
  unknownTag: (which: string): OutcomeRefusal => ({ reason: 'unknown-tag', detail: `no logged answer carries the tag ${which}` }),
  ambiguousTag: (which: string): OutcomeRefusal => ({ reason: 'ambiguous-tag', detail: `more than one logged answer carries the tag ${which}; send the request id instead` }),
};

/** A tag's pairs in key order, as both stores look them up. */
export const tagPairs = (tag: Record<string, string> | undefined): Array<[string, string]> => Object.entries(tag ?? {}).sort(([a], [b]) => (a < b ? -1 : 1));

const NEWEST = 'SELECT label FROM outcomes AS o WHERE o.request_id = s.request_id ORDER BY o.seq DESC LIMIT 1';

export function createOutcomesStore(db: Database): SqliteOutcomesStore {
  const models = createModelCache(db);
  const byId = db.prepare('SELECT request_id, model_sha256, model_name FROM scored_requests WHERE request_id = ?');
  // instr() first: a cheap test of the JSON text that spares json_each on most rows.
  const tagSql = (pairs: number, withModel: boolean): string =>
    `SELECT request_id, model_sha256, model_name FROM scored_requests WHERE ${withModel ? 'model_name = ? AND ' : ''}tags IS NOT NULL AND ${Array.from(
      { length: pairs },
      () => "instr(tags, ?) > 0 AND EXISTS (SELECT 1 FROM json_each(scored_requests.tags) AS t WHERE t.key = ? AND t.value = ? AND t.type = 'text')",
    ).join(' AND ')} LIMIT 2`;
  const tagQueries = new Map<string, Statement>();
  const newest = db.prepare('SELECT seq, label FROM outcomes WHERE request_id = ? ORDER BY seq DESC LIMIT 1');
  const head = db.prepare('SELECT seq, chain_hash FROM outcomes ORDER BY seq DESC LIMIT 1');
  const insert = db.prepare('INSERT INTO outcomes (seq, request_id, label, observed_at, source, recorded_at, key_label, replaces, chain_hash) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)');
  const latest = db.prepare('SELECT sha256 FROM models WHERE name = ? ORDER BY last_loaded_at DESC, rowid DESC LIMIT 1');
  const windowOutcomes = db.prepare(
    `SELECT COUNT(*) AS scored, COUNT(actual) AS labelled, COALESCE(SUM(actual = label), 0) AS right FROM
     (SELECT s.label, (${NEWEST}) AS actual FROM scored_requests AS s WHERE s.model_name = ? AND s.received_at >= ? AND s.received_at < ?)`,
  );
  const countScored = db.prepare('SELECT COUNT(*) AS n FROM scored_requests WHERE model_sha256 = ? AND received_at >= ? AND received_at < ?');
  const labelled = db.prepare(
    `SELECT * FROM (SELECT s.received_at, s.seq, s.label, s.probabilities, s.margin, s.in_domain, s.review, (${NEWEST}) AS actual
     FROM scored_requests AS s WHERE s.model_sha256 = ? AND s.received_at >= ? AND s.received_at < ?) WHERE actual IS NOT NULL ORDER BY received_at, seq`,
  );
  const vectors = (labelledOnly: boolean): Statement =>
    db.prepare(
      `SELECT * FROM (SELECT s.request_id, s.received_at, s.seq, s.model_sha256, s.features, s.label, s.in_domain, (${NEWEST}) AS actual
       FROM scored_requests AS s WHERE s.model_name = ? AND s.received_at >= ? AND s.received_at < ?)${labelledOnly ? ' WHERE actual IS NOT NULL' : ''} ORDER BY received_at, seq`,
    );
  const allVectors = vectors(false);
  const labelledVectors = vectors(true);

  type Target = { request_id: string; model_sha256: string; model_name: string };
  const find = (item: OutcomeInput): Target | OutcomeRefusal => {
    if (item.requestId !== undefined) {
      const t = byId.get(item.requestId) as Target | undefined;
      return t ?? lookupRefusal.unknownRequest(item.requestId);
    }
    const pairs = tagPairs(item.tag);
    const key = `${pairs.length}:${item.model !== undefined}`;
    let q = tagQueries.get(key);
    if (!q) tagQueries.set(key, (q = db.prepare(tagSql(pairs.length, item.model !== undefined))));
    const args: unknown[] = item.model !== undefined ? [item.model] : [];
    for (const [k, v] of pairs) args.push(JSON.stringify(v), k, v);
    const hits = q.all(...args) as Target[];
    const which = tagWhich(pairs, item.model);
    if (hits.length === 0) return lookupRefusal.unknownTag(which);
    if (hits.length > 1) return lookupRefusal.ambiguousTag(which);
    return hits[0] as Target;
  };

  const recordAll = db.transaction((items: OutcomeInput[], keyLabel: string | null, now: number): OutcomeVerdict[] => {
    const top = head.get() as { seq: number; chain_hash: Buffer } | undefined;
    let at: { seq: number; hash: Buffer } = { seq: top?.seq ?? 0, hash: top?.chain_hash ?? OUTCOME_GENESIS };
    return items.map((item): OutcomeVerdict => {
      const target = find(item);
      if ('reason' in target) return { requestId: item.requestId ?? null, status: 'refused', ...target };
      const classes = models(target.model_sha256)?.classes ?? [];
      if (!classes.includes(item.label)) {
        return {
          requestId: target.request_id,
          status: 'refused',
          reason: 'not-a-class',
          detail: notAClassDetail(item.label, target.model_name, classes),
          classes,
        };
      }
      const next = nextOutcome(item, target.request_id, newest.get(target.request_id) as { seq: number; label: string } | undefined, at, now, keyLabel);
      if (next.row) {
        const r = next.row;
        insert.run(r.seq, r.request_id, r.label, r.observed_at, r.source, r.recorded_at, r.key_label, r.replaces, r.chain_hash);
        at = { seq: r.seq, hash: r.chain_hash };
      }
      return next.verdict;
    });
  });

  return {
    // IMMEDIATE: the write lock before the chain head is read, as for the scored rows.
    record: (items, keyLabel, now = Date.now()) => recordAll.immediate(items, keyLabel, now),
    current(requestIds) {
      const out = new Map<string, CurrentOutcome>();
      if (requestIds.length === 0) return out;
      // One query per page (at most 1,000 ids, under SQLite's 32,766 parameters).
      const rows = db
        .prepare(
          `SELECT o.request_id, o.label, o.observed_at FROM outcomes AS o
           WHERE o.request_id IN (${requestIds.map(() => '?').join(',')}) AND o.seq = (SELECT MAX(seq) FROM outcomes AS p WHERE p.request_id = o.request_id)`,
        )
        .all(...requestIds) as Array<{ request_id: string; label: string; observed_at: number | null }>;
      for (const r of rows) out.set(r.request_id, { label: r.label, observed_at: r.observed_at });
      return out;
    },
    windowOutcomes: (model, from, to) => windowOutcomes.get(model, from, to) as { scored: number; labelled: number; right: number },
    countScored: (sha256, from, to) => (countScored.get(sha256, from, to) as { n: number }).n,
    labelledRows: (sha256, from, to) => labelled.iterate(sha256, from, to) as IterableIterator<LabelledRowView>,
    loggedVectors: (model, from, to, labelledOnly) => (labelledOnly ? labelledVectors : allVectors).iterate(model, from, to) as IterableIterator<LoggedVectorView>,
    latestModel(name) {
      const m = latest.get(name) as { sha256: string } | undefined;
      return m ? models(m.sha256) : null;
    },
    describeModel: (sha256) => models(sha256),
    verifyChain: () => verifyOutcomeChain(db),
  };
}

/** The walk of the outcome chain, row by row in seq order, whatever the rows are read from. */
export interface OutcomeChainWalk {
  /** The next row; a verdict when the walk stops at it, else null. */
  push(row: OutcomeRow & { chain_hash: Buffer }): OutcomeChainVerdict | null;
  /** After the last row. */
  finish(): OutcomeChainVerdict;
}

/** Recomputes the outcome chain from the genesis, naming the first row changed, removed or put in. */
export function startOutcomeWalk(): OutcomeChainWalk {
  let prev: Buffer = OUTCOME_GENESIS;
  let expect = 1;
  let rows = 0;
  const verdict = (problem: OutcomeChainVerdict['problem']): OutcomeChainVerdict => ({ intact: problem === null, rows, head: { seq: expect - 1, hash: prev.toString('hex') }, problem });
  return {
    push(row) {
      if (row.seq > expect) {
        const gap = row.seq - 1 === expect ? `outcome ${expect} is missing` : `outcomes ${expect} to ${row.seq - 1} are missing`;
        return verdict({ kind: 'removed', seq: expect, request_id: null, detail: `${gap}: the outcome chain goes from ${expect - 1} to ${row.seq}` });
      }
      if (row.seq < expect) return verdict({ kind: 'inserted', seq: row.seq, request_id: row.request_id, detail: `outcome ${row.seq} lies before the first outcome` });
      if (!outcomeHash(prev, row).equals(row.chain_hash)) {
        return verdict({ kind: 'changed', seq: row.seq, request_id: row.request_id, detail: `outcome ${row.seq} (request ${row.request_id}) does not hash to its stored chain hash: it was changed` });
      }
      prev = row.chain_hash;
      expect++;
      rows++;
      return null;
    },
    finish: () => verdict(null),
  };
}

/** Recomputes the outcome chain of a SQLite log from the genesis. */
export function verifyOutcomeChain(db: Database): OutcomeChainVerdict {
  const walk = startOutcomeWalk();
  for (const row of db.prepare('SELECT * FROM outcomes ORDER BY seq').iterate() as IterableIterator<OutcomeRow & { chain_hash: Buffer }>) {
    const stop = walk.push(row);
    if (stop) return stop;
  }
  return walk.finish();
}
