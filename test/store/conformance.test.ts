// The store contract (src/store/contract.ts), checked the same way against both stores: SQLite on
// a temporary file, and PostgreSQL on a fresh database of the throwaway server
// (test/helpers/postgres-global.ts; skipped, with one line saying why, where there is none).
import { afterAll, afterEach, describe, expect, it } from 'vitest';
import type { Store } from '../../src/store/contract.js';
import type { OutcomeInput } from '../../src/store/outcomes-store.js';
import { LogWriteError, type ScoredRow } from '../../src/store/request-log.js';
import { openStoreAt } from '../../src/store/open.js';
import { tempDir } from '../helpers/datasets.js';
import { freshDatabase, serverUrl, sql } from '../helpers/postgres.js';

const tmp = tempDir();
afterAll(() => tmp.remove());

const OPTIONS = { sync: 'normal', flushMs: 0, flushRows: 64, queueRows: 10_000, rejectedRows: 1000 } as const;
const MODEL = { sha256: 'c'.repeat(64), name: 'press', version: '2' };
const RECORD = { ...MODEL, features: [{ name: 'force_kn', unit: 'kN' }, { name: 'stroke_mm', unit: 'mm' }], classes: ['ok', 'crack'], bundle: '{"stored":true}' };
const T0 = Date.parse('2026-12-01T06:00:00Z');

/** The i-th row of a fixed series: every column varied, so that the chain seals real differences. */
function row(i: number, id = `r${i}`): ScoredRow {
  return {
    requestId: id,
    batchId: i % 3 === 0 ? `b${i}` : null,
    receivedAt: T0 + i * 60_000,
    model: MODEL,
    features: [100 + i + 0.125, -5 - i / 7],
    tags: i % 2 === 0 ? { line: 'L1' } : { line: 'L2', shift: 'night' },
    label: i % 4 === 3 ? 'crack' : 'ok',
    probabilities: [0.9 - i / 100, 0.1 + i / 100],
    margin: 0.8 - i / 50,
    inDomain: i % 5 !== 4,
    review: i % 5 === 4,
    domain: { checks: [{ detector: 'envelope', value: i, threshold: 0, passed: i % 5 !== 4 }], outside: [] },
    latencyUs: 1000 + i,
    keyLabel: i % 2 === 0 ? 'line-3 app' : null,
    explained: i % 3 === 0,
  };
}

interface Kind {
  name: 'sqlite' | 'postgres';
  open(): Promise<{ store: Store; location: string }>;
  /** The chain hashes as stored, in seq order (hex). */
  hashes(location: string): Promise<string[]>;
  /** The outcome chain's hashes as stored, in seq order (hex). */
  outcomeHashes(location: string): Promise<string[]>;
  /** One statement on the database behind the store's back (a tampering, for the verifier to find). */
  exec(location: string, statement: string): Promise<void>;
}

const kinds: Array<Kind & { skip: boolean }> = [
  {
    name: 'sqlite',
    skip: false,
    async open() {
      const location = tmp.file(`c-${Math.random().toString(36).slice(2)}.db`);
      return { store: await openStoreAt(location, OPTIONS), location };
    },
    async hashes(location) {
      const { default: BetterSqlite3 } = await import('better-sqlite3');
      const db = new BetterSqlite3(location, { readonly: true });
      const out = (db.prepare('SELECT chain_hash FROM scored_requests ORDER BY seq').all() as Array<{ chain_hash: Buffer }>).map((r) => r.chain_hash.toString('hex'));
      db.close();
      return out;
    },
    async outcomeHashes(location) {
      const { default: BetterSqlite3 } = await import('better-sqlite3');
      const db = new BetterSqlite3(location, { readonly: true });
      const out = (db.prepare('SELECT chain_hash FROM outcomes ORDER BY seq').all() as Array<{ chain_hash: Buffer }>).map((r) => r.chain_hash.toString('hex'));
      db.close();
      return out;
    },
    async exec(location, statement) {
      const { default: BetterSqlite3 } = await import('better-sqlite3');
      const db = new BetterSqlite3(location);
      db.exec(statement);
      db.close();
    },
  },
  {
    name: 'postgres',
    skip: serverUrl === null,
    async open() {
      const location = await freshDatabase();
      return { store: await openStoreAt(location, OPTIONS), location };
    },
    async hashes(location) {
      return (await sql<{ chain_hash: Buffer }>(location, 'SELECT chain_hash FROM scored_requests ORDER BY seq')).map((r) => r.chain_hash.toString('hex'));
    },
    async outcomeHashes(location) {
      return (await sql<{ chain_hash: Buffer }>(location, 'SELECT chain_hash FROM outcomes ORDER BY seq')).map((r) => r.chain_hash.toString('hex'));
    },
    async exec(location, statement) {
      await sql(location, statement);
    },
  },
];

/** Every row of a drift store's stream, whichever form the store gives it in. */
async function allRows<T>(source: Iterable<T> | AsyncIterable<T[]>): Promise<T[]> {
  const out: T[] = [];
  if (Symbol.asyncIterator in source) for await (const page of source) out.push(...page);
  else for (const r of source) out.push(r);
  return out;
}

/** The chain hashes the SQLite store gives the series of rows: the reference both must match. */
let reference: string[] | null = null;
/** Likewise for the outcome chain of the batch below. */
let outcomeReference: string[] | null = null;

// Tags for the outcome lookups: a serial each, one with a quote and an escaped NUL in its JSON
// text (which a cast to jsonb on PostgreSQL refuses), two answers sharing line L1 alone.
const TAGGED: Array<Record<string, string>> = [{ serial: 'S-0', line: 'L1' }, { serial: 'nul\u0000"x', line: 'L2' }, { line: 'L1' }, { serial: 'S-3', shift: 'night' }];
const outcomeRow = (i: number): ScoredRow => ({ ...row(i), tags: TAGGED[i] ?? { serial: `S-${i}` } });
const item = (o: Partial<OutcomeInput> & { label: string }): OutcomeInput => ({ observedAt: null, source: null, replace: false, ...o });
/** One batch with every kind of verdict; a later item sees an earlier one. */
const OUTCOME_BATCH: OutcomeInput[] = [
  item({ requestId: 'r0', label: 'ok', observedAt: T0 + 5, source: 'gauge 2' }),
  item({ tag: { serial: 'nul\u0000"x' }, label: 'crack' }),
  item({ tag: { serial: 'S-0' }, model: 'press', label: 'ok' }),
  item({ requestId: 'r2', label: 'bent' }),
  item({ requestId: 'nope', label: 'ok' }),
  item({ requestId: 'a\u0000b', label: 'ok' }),
  item({ tag: { line: 'L1' }, label: 'ok' }),
  item({ tag: { serial: 'S-0' }, model: 'other', label: 'ok' }),
  item({ tag: { serial: 'S' }, label: 'ok' }),
  item({ tag: { serial: 'S-3', shift: 'day' }, label: 'ok' }),
  item({ requestId: 'r0', label: 'crack' }),
  item({ requestId: 'r0', label: 'crack', replace: true }),
  item({ tag: { shift: 'night', serial: 'S-3' }, label: 'crack' }),
];

for (const kind of kinds) {
  describe.skipIf(kind.skip)(`the ${kind.name} store`, () => {
    let store: Store | null = null;
    afterEach(async () => {
      await store?.close();
      store = null;
    });
    const open = async (): Promise<{ store: Store; location: string }> => {
      const o = await kind.open();
      store = o.store;
      await o.store.recordModel(RECORD);
      return o;
    };

    it('commits appended rows, chains them, and seals the same bytes to the same hashes on either store', async () => {
      const { store: s, location } = await open();
      await Promise.all([s.log.append([row(0), row(1), row(2)]), s.log.append([row(3)]), s.log.append([row(4), row(5)])]);
      await s.log.append([row(6), row(7), row(8), row(9)]);
      const v = await s.verifyChain();
      expect(v).toMatchObject({ intact: true, rows: 10, head: { seq: 10 }, problem: null });
      const hashes = await kind.hashes(location);
      expect(hashes).toHaveLength(10);
      expect(hashes.at(-1)).toBe(v.head.hash);
      // The SQLite store runs first: the PostgreSQL one must give the very same chain.
      if (kind.name === 'sqlite') reference = hashes;
      else if (reference !== null) expect(hashes).toEqual(reference);
    });

    it('pages the audit log newest first with filters and a cursor, and looks one request up', async () => {
      const { store: s } = await open();
      await s.log.append(Array.from({ length: 10 }, (_, i) => row(i)));
      const ids = async (f: Parameters<Store['queryRequests']>[0]) => (await s.queryRequests(f, 100)).items.map((i) => i.request_id);
      expect(await ids({ label: 'crack' })).toEqual(['r7', 'r3']);
      expect(await ids({ inDomain: false })).toEqual(['r9', 'r4']);
      expect(await ids({ tags: [['line', 'L2'], ['shift', 'night']], label: 'ok' })).toEqual(['r9', 'r5', 'r1']);
      expect(await ids({ from: T0 + 2 * 60_000, to: T0 + 4 * 60_000 })).toEqual(['r3', 'r2']);
      expect(await ids({ model: 'other' })).toEqual([]);
      const seen: string[] = [];
      let cursor: string | undefined;
      do {
        const page = await s.queryRequests({ tags: [['line', 'L1']] }, 2, cursor);
        seen.push(...page.items.map((i) => i.request_id));
        cursor = page.next_cursor ?? undefined;
      } while (cursor !== undefined);
      expect(seen).toEqual(['r8', 'r6', 'r4', 'r2', 'r0']);
      const one = await s.getRequest('r3');
      expect(one).toMatchObject({ request_id: 'r3', batch_id: 'b3', features: { force_kn: 103.125, stroke_mm: -5 - 3 / 7 }, probabilities: { ok: 0.87, crack: 0.13 }, label: 'crack', key_label: null, explained: true, latency_ms: 1.003 });
      expect(await s.getRequest('nope')).toBeNull();
    });

    it('fails only the request whose id is already logged, and commits the others of its batch', async () => {
      const { store: s } = await open();
      await s.log.append([row(0)]);
      const results = await Promise.allSettled([s.log.append([row(1)]), s.log.append([row(2, 'r0')]), s.log.append([row(3)])]);
      expect(results.map((r) => r.status)).toEqual(['fulfilled', 'rejected', 'fulfilled']);
      expect((results[1] as PromiseRejectedResult).reason).toBeInstanceOf(LogWriteError);
      expect((await s.queryRequests({}, 10)).items.map((i) => i.request_id)).toEqual(['r3', 'r1', 'r0']);
      expect(await s.verifyChain()).toMatchObject({ intact: true, rows: 3 });
    });

    it('keeps API keys as hashes: create, find by prefix, touch, revoke', async () => {
      const { store: s } = await open();
      expect(await s.keys.anyKey()).toBe(false);
      await s.keys.create({ id: 'k1', prefix: 'plk_abcdef', hash: 'aa'.repeat(32), role: 'scorer', label: 'line-3 app', createdAt: T0 });
      await s.keys.create({ id: 'k2', prefix: 'plk_zzzzzz', hash: 'bb'.repeat(32), role: 'admin', label: 'ops', createdAt: T0 + 1 });
      expect(await s.keys.anyKey()).toBe(true);
      expect(await s.keys.findByPrefix('plk_abcdef')).toEqual([expect.objectContaining({ id: 'k1', hash: 'aa'.repeat(32), role: 'scorer' })]);
      await s.keys.touch('k1', T0 + 5);
      expect(await s.keys.revoke('k2', T0 + 9)).toBe(true);
      expect(await s.keys.revoke('k2', T0 + 10)).toBe(false);
      expect(await s.keys.findByPrefix('plk_zzzzzz')).toEqual([]);
      expect(await s.keys.list()).toEqual([
        { id: 'k1', prefix: 'plk_abcdef', role: 'scorer', label: 'line-3 app', created_at: T0, last_used_at: T0 + 5, revoked_at: null },
        { id: 'k2', prefix: 'plk_zzzzzz', role: 'admin', label: 'ops', created_at: T0 + 1, last_used_at: null, revoked_at: T0 + 9 },
      ]);
    });

    it('streams a bundle\'s rows for drift reports, counts refusals and other versions, and stores reports', async () => {
      const { store: s } = await open();
      await s.log.append(Array.from({ length: 6 }, (_, i) => row(i)));
      s.log.appendRejected({ requestId: 'x1', receivedAt: T0 + 60_000, method: 'POST', route: '/v1/models/press/score', modelName: 'press', status: 400, problemType: 'invalid-request', bodyBytes: 12 });
      await s.log.append([row(6)]);
      const rows = await allRows(s.drift.scoredRows(MODEL.sha256, T0, T0 + 5 * 60_000));
      expect(rows.map((r) => r.received_at)).toEqual([0, 1, 2, 3, 4].map((i) => T0 + i * 60_000));
      expect(Buffer.from(rows[1]!.features).readDoubleLE(0)).toBe(101.125);
      expect(rows.map((r) => [r.label, r.in_domain, r.review])).toEqual([['ok', 1, 0], ['ok', 1, 0], ['ok', 1, 0], ['crack', 1, 0], ['ok', 0, 1]]);
      expect(await s.drift.countRejected('press', T0, T0 + 3_600_000)).toBe(1);
      expect(await s.drift.countOtherVersions('press', MODEL.sha256, T0, T0 + 3_600_000)).toBe(0);
      expect(await s.drift.bundleText('press')).toEqual({ sha256: MODEL.sha256, text: '{"stored":true}' });
      const report = { id: 'd1', model_name: 'press', model_sha256: MODEL.sha256, window_from: T0, window_to: T0 + 86_400_000, created_at: T0, trigger: 'nightly', report: { verdict: 'stable' } };
      await s.drift.saveReport(report);
      await s.drift.saveReport({ ...report, id: 'd2', trigger: 'request' });
      expect(await s.drift.hasReport('press', T0, T0 + 86_400_000)).toBe(true);
      expect((await s.drift.getReport('d1'))?.report).toBe('{"verdict":"stable"}');
      expect((await s.drift.listReports({ model: 'press' }, 10)).map((r) => r.id)).toEqual(['d2', 'd1']);
    });

    it('raises and clears alerts with their deliveries, and moves deliveries through the outbox', async () => {
      const { store: s } = await open();
      await s.log.append(Array.from({ length: 10 }, (_, i) => row(i)));
      expect(await s.alerts.windowCounts('press', T0, T0 + 10 * 60_000)).toEqual({ scored: 10, outOfDomain: 2, review: 2, marginSum: expect.closeTo(8 - 45 / 50, 9) });
      expect(await s.alerts.labelCount('press', 'crack', T0, T0 + 10 * 60_000)).toBe(2);
      const alert = { id: 'a1', rule: 'ood', model_name: 'press', signal: 'out_of_domain_rate', direction: 'above' as const, threshold: 0.1, window_ms: 600_000, raised_value: 0.2, raised_at: T0 };
      await s.alerts.raise(alert, [{ eventId: 'e1', webhook: 'ops', orderingKey: 'ood/press', body: '{"n":1}' }], T0);
      expect((await s.alerts.openAlerts()).map((a) => a.id)).toEqual(['a1']);
      await s.alerts.clear('a1', 0.01, T0 + 1000, [{ eventId: 'e2', webhook: 'ops', orderingKey: 'ood/press', body: '{"n":2}' }]);
      expect(await s.alerts.openAlerts()).toEqual([]);
      expect((await s.alerts.listAlerts({ state: 'cleared' }, 10)).map((a) => [a.id, a.cleared_value])).toEqual([['a1', 0.01]]);
      expect(await s.alerts.pendingDeliveries()).toBe(2);
      // In order per key: only the first is due until it is delivered.
      const due = await s.alerts.dueDeliveries(T0 + 2000, 10, 'ops');
      expect(due.map((d) => d.event_id)).toEqual(['e1']);
      await s.alerts.markDelivered(due[0]!.seq, T0 + 2100);
      const next = await s.alerts.dueDeliveries(T0 + 2200, 10, 'ops');
      expect(next.map((d) => d.event_id)).toEqual(['e2']);
      await s.alerts.markRetry(next[0]!.seq, 1, T0 + 60_000, 'answered 503');
      expect(await s.alerts.dueDeliveries(T0 + 3000, 10, 'ops')).toEqual([]);
      expect((await s.alerts.dueDeliveries(T0 + 60_000, 10, 'ops')).map((d) => [d.event_id, d.attempts, d.body])).toEqual([['e2', 1, '{"n":2}']]);
      expect((await s.alerts.deliveries()).map((d) => d.status)).toEqual(['delivered', 'pending']);
    });

    it('prunes a prefix of the log behind a checkpoint; the rest verifies and new rows chain on', async () => {
      const { store: s } = await open();
      await s.log.append(Array.from({ length: 10 }, (_, i) => row(i)));
      const step = await s.retention.pruneStep(T0 + 4 * 60_000, 1000, T0 + 1);
      expect(step.scored).toBe(4);
      expect(await s.verifyChain()).toMatchObject({ intact: true, rows: 6, from: { seq: 4, cut: true } });
      await s.retention.pruneStep(T0 + 99 * 60_000, 1000, T0 + 2);
      await s.log.append([row(10), row(11)]);
      expect(await s.verifyChain()).toMatchObject({ intact: true, rows: 2, from: { seq: 10, cut: true }, head: { seq: 12 } });
    });

    it('records a batch of outcomes in order, by request id and by tag, refusing what it must, and chains them to the same hashes on either store', async () => {
      const { store: s, location } = await open();
      await s.log.append(Array.from({ length: 8 }, (_, i) => outcomeRow(i)));
      const verdicts = await s.outcomes.record(OUTCOME_BATCH, 'qa app', T0 + 3_600_000);
      expect(verdicts.map((v) => [v.requestId, v.status, 'reason' in v ? v.reason : null])).toEqual([
        ['r0', 'recorded', null],
        ['r1', 'recorded', null],
        ['r0', 'unchanged', null],
        ['r2', 'refused', 'not-a-class'],
        ['nope', 'refused', 'unknown-request'],
        ['a\u0000b', 'refused', 'unknown-request'],
        [null, 'refused', 'ambiguous-tag'],
        [null, 'refused', 'unknown-tag'],
        [null, 'refused', 'unknown-tag'],
        [null, 'refused', 'unknown-tag'],
        ['r0', 'refused', 'conflict'],
        ['r0', 'recorded', null],
        ['r3', 'recorded', null],
      ]);
      expect(verdicts[10]).toMatchObject({ recorded: 'ok', detail: 'request r0 already has the outcome "ok"; send "replace": true to record "crack" over it' });
      expect(verdicts[3]).toMatchObject({ classes: ['ok', 'crack'] });
      // Again: the same labels are unchanged now, and nothing new joins the chain.
      expect((await s.outcomes.record([item({ requestId: 'r1', label: 'crack' })], null, T0)).map((v) => v.status)).toEqual(['unchanged']);
      const v = await s.outcomes.verifyChain();
      expect(v).toMatchObject({ intact: true, rows: 4, head: { seq: 4 }, problem: null });
      const hashes = await kind.outcomeHashes(location);
      expect(hashes.at(-1)).toBe(v.head.hash);
      if (kind.name === 'sqlite') outcomeReference = hashes;
      else if (outcomeReference !== null) expect(hashes).toEqual(outcomeReference);

      const current = await s.outcomes.current(['r0', 'r1', 'r2', 'zz']);
      expect([...current.entries()].sort()).toEqual([
        ['r0', { label: 'crack', observed_at: null }],
        ['r1', { label: 'crack', observed_at: null }],
      ]);
      // r0 and r1 were answered ok, r3 crack: one of the three labelled answers was right.
      expect(await s.outcomes.windowOutcomes('press', T0, T0 + 3_600_000)).toEqual({ scored: 8, labelled: 3, right: 1 });
      expect(await s.outcomes.windowOutcomes('press', T0 + 2 * 60_000, T0 + 3_600_000)).toEqual({ scored: 6, labelled: 1, right: 1 });
      expect(await s.outcomes.countScored(MODEL.sha256, T0, T0 + 3 * 60_000)).toBe(3);
      const labelled = await allRows(s.outcomes.labelledRows(MODEL.sha256, T0, T0 + 3_600_000));
      expect(labelled.map((r) => [r.received_at, r.label, r.actual, r.in_domain, r.review])).toEqual([
        [T0, 'ok', 'crack', 1, 0],
        [T0 + 60_000, 'ok', 'crack', 1, 0],
        [T0 + 3 * 60_000, 'crack', 'crack', 1, 0],
      ]);
      expect(Buffer.from(labelled[2]!.probabilities).readDoubleLE(8)).toBe(0.13);
      const vectors = await allRows(s.outcomes.loggedVectors('press', T0, T0 + 3_600_000, false));
      expect(vectors.map((r) => [r.request_id, r.actual])).toEqual([['r0', 'crack'], ['r1', 'crack'], ['r2', null], ['r3', 'crack'], ['r4', null], ['r5', null], ['r6', null], ['r7', null]]);
      expect(Buffer.from(vectors[4]!.features).readDoubleLE(0)).toBe(104.125);
      expect((await allRows(s.outcomes.loggedVectors('press', T0, T0 + 3_600_000, true))).map((r) => r.request_id)).toEqual(['r0', 'r1', 'r3']);
      expect(await s.outcomes.latestModel('press')).toMatchObject({ sha256: MODEL.sha256, classes: ['ok', 'crack'], features: RECORD.features });
      expect(await s.outcomes.latestModel('other')).toBeNull();
      expect(await s.outcomes.describeModel(MODEL.sha256)).toMatchObject({ name: 'press', version: '2' });
      expect(await s.outcomes.describeModel('f'.repeat(64))).toBeNull();

      // A label changed behind the store's back is found, at its row.
      await kind.exec(location, "UPDATE outcomes SET label = 'ok' WHERE seq = 2");
      expect(await s.outcomes.verifyChain()).toMatchObject({ intact: false, rows: 1, problem: { kind: 'changed', seq: 2, request_id: 'r1' } });
    });

    it('records none of a batch whose transaction fails in its middle', async () => {
      const { store: s, location } = await open();
      await s.log.append([outcomeRow(0), outcomeRow(1)]);
      await kind.exec(
        location,
        kind.name === 'sqlite'
          ? "CREATE TRIGGER fail_second BEFORE INSERT ON outcomes WHEN NEW.seq = 2 BEGIN SELECT RAISE(ABORT, 'disk I/O error'); END"
          : "CREATE FUNCTION fail_second() RETURNS trigger LANGUAGE plpgsql AS $$ BEGIN IF NEW.seq = 2 THEN RAISE EXCEPTION 'disk I/O error'; END IF; RETURN NEW; END $$; CREATE TRIGGER fail_second BEFORE INSERT ON outcomes FOR EACH ROW EXECUTE FUNCTION fail_second()",
      );
      const batch = [item({ requestId: 'r0', label: 'ok' }), item({ requestId: 'r1', label: 'crack' })];
      await expect(Promise.resolve().then(() => s.outcomes.record(batch, null, T0))).rejects.toThrow(/disk I\/O error/);
      expect(await s.outcomes.verifyChain()).toMatchObject({ intact: true, rows: 0 });
      await kind.exec(location, 'DROP TRIGGER fail_second' + (kind.name === 'sqlite' ? '' : ' ON outcomes'));
      expect((await s.outcomes.record(batch, null, T0)).map((v) => v.status)).toEqual(['recorded', 'recorded']);
      expect(await s.outcomes.verifyChain()).toMatchObject({ intact: true, rows: 2, head: { seq: 2 } });
    });

    it('says it is writable, and runs exclusive work', async () => {
      const { store: s } = await open();
      expect(await s.writeState()).toEqual({ writable: true, reason: null });
      let ran = 0;
      expect(await s.coordination.exclusively('test-work', async () => void ran++)).toBe(true);
      expect(ran).toBe(1);
    });
  });
}
