// Outcomes through HTTP on both stores, with the same answers: the invented demo day replayed
// into a service on a SQLite file and one on a PostgreSQL database, the same outcomes posted to
// each (by shot tag, with refused items among them), and then the outcomes report, the requests
// listing, the drift report's outcome figures, the alert signals, export, compare and audit verify
// read back from both and compared. Request ids differ between the two services (they are made
// fresh), so answers are matched by their shot tag. Skipped without a PostgreSQL server.
import { readFileSync } from 'node:fs';
import BetterSqlite3 from 'better-sqlite3';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { auditVerifyAction, auditVerifyServerAction } from '../../src/cli/actions/audit.js';
import { compareAction } from '../../src/cli/actions/compare.js';
import { exportAction } from '../../src/cli/actions/export.js';
import { configSchema } from '../../src/config/config.js';
import { INSPECTED_EVERY } from '../../src/demo/outcomes.js';
import { type ReplaySummary, replayDemoDay } from '../../src/demo/replay.js';
import { buildApp } from '../../src/http/app.js';
import { openRuntime } from '../../src/runtime.js';
import { tempDir } from '../helpers/datasets.js';
import { DAY_END, DAY_START, DEMO_DIR } from '../helpers/demo.js';
import { freshDatabase, serverUrl, sql } from '../helpers/postgres.js';
import { sink } from '../helpers/sink.js';

const tmp = tempDir();
const MODEL = 'moulding-quality';
const BUNDLE = `${DEMO_DIR}models/${MODEL}.bundle.json`;
const WINDOW = `from=${new Date(DAY_START).toISOString()}&to=${new Date(DAY_END).toISOString()}`;
const quiet = () => ({ stdout: sink(), stderr: sink(), interactive: false });
const RULES = [
  { name: 'accuracy-low', model: '*', signal: 'accuracy', window: '1d', below: 0.9, min_labelled: 30 },
  { name: 'few-outcomes', model: '*', signal: 'labelled_rate', window: '1d', below: 0.2 },
];

interface Side {
  name: 'sqlite' | 'postgres';
  db: string;
  app: FastifyInstance;
  day: ReplaySummary;
  /** request id -> shot tag, to compare answers whose ids differ. */
  shotOf: Map<string, string>;
}

async function start(name: Side['name'], db: string): Promise<Side> {
  const runtime = await openRuntime(configSchema.parse({ db, models_dir: 'demo-data/models', reports: { schedule: 'off' }, alerts: { rules: RULES } }));
  const app = await buildApp(runtime);
  await app.ready();
  const day = await replayDemoDay(app.scoring, MODEL, DEMO_DIR, DAY_START);
  return { name, db, app, day, shotOf: new Map(day.shots.map((s) => [s.requestId, s.shot])) };
}

/** A body's request ids replaced by the shot tags of their answers, and the times a report was made dropped. */
function comparable(side: Side, value: unknown): unknown {
  return JSON.parse(JSON.stringify(value), (key, v) => {
    if (key === 'created_at' || key === 'id') return undefined;
    if (typeof v !== 'string') return v;
    let out = v;
    for (const m of v.match(/[0-9a-f]{8}-[0-9a-f]{4}-7[0-9a-f]{3}-[0-9a-f]{4}-[0-9a-f]{12}/g) ?? []) out = out.replaceAll(m, `shot:${side.shotOf.get(m) ?? '?'}`);
    return out;
  });
}

let sides: Side[] = [];
afterAll(async () => {
  await Promise.all(sides.map((s) => s.app.close().catch(() => undefined)));
  tmp.remove();
});

describe.skipIf(serverUrl === null)('outcomes on PostgreSQL, with the answers of SQLite', () => {
  beforeAll(async () => {
    sides = [await start('sqlite', tmp.file('audit.db')), await start('postgres', await freshDatabase())];
  }, 120_000);
  const both = async <T>(fn: (s: Side) => Promise<T>): Promise<[T, T]> => [await fn(sides[0] as Side), await fn(sides[1] as Side)];

  it('records the same outcomes in batches by shot tag, refusing the same items with the same problems', async () => {
    const [a, b] = await both(async (s) => {
      const inspected = s.day.shots.filter((_, i) => i % INSPECTED_EVERY === INSPECTED_EVERY - 1);
      const answers: unknown[] = [];
      for (let i = 0; i < inspected.length; i += 500) {
        const items = inspected.slice(i, i + 500).map((shot) => ({ tag: { shot: shot.shot }, model: MODEL, label: shot.outcome, observed_at: new Date(shot.receivedAt + 2_400_000).toISOString(), source: 'inspection station, cell 3' }));
        const res = await s.app.inject({ method: 'POST', url: '/v1/outcomes', payload: { items } });
        expect(res.statusCode).toBe(200);
        answers.push(res.json());
      }
      // A batch of odd items: each refused with its own problem, the good ones recorded.
      const first = s.day.shots[0]!;
      const second = s.day.shots[1]!;
      const res = await s.app.inject({
        method: 'POST',
        url: '/v1/outcomes',
        payload: {
          items: [
            { request_id: first.requestId, label: first.outcome, source: 'gauge\u0000 7' },
            { request_id: first.requestId, label: first.outcome, source: 'gauge 7' },
            { request_id: '0190f0c4-0000-7000-8000-000000000000', label: 'good' },
            { request_id: 'nul\u0000id', label: 'good' },
            { tag: { line: '3' }, label: 'good' },
            { tag: { shot: 'no such shot' }, label: 'good' },
            { request_id: second.requestId, label: 'daisy' },
            { request_id: first.requestId, label: first.outcome === 'good' ? 'flash' : 'good' },
            { request_id: second.requestId, label: second.outcome },
            { tag: { shot: first.shot }, label: first.outcome === 'good' ? 'flash' : 'good', replace: true },
          ],
        },
      });
      expect(res.statusCode).toBe(200);
      answers.push(res.json());
      return comparable(s, answers);
    });
    expect(b).toEqual(a);
    const odd = (a as Array<{ recorded: number; items: Array<{ status: string; problem?: { type: string; errors?: Array<{ pointer: string }> } }> }>).at(-1)!;
    expect(odd.items.map((i) => [i.status, i.problem?.type.replace('urn:plumbline:problem:', '') ?? null])).toEqual([
      ['refused', 'invalid-request'],
      ['recorded', null],
      ['refused', 'unknown-request'],
      ['refused', 'unknown-request'],
      ['refused', 'ambiguous-tag'],
      ['refused', 'unknown-tag'],
      ['refused', 'unknown-label'],
      ['refused', 'outcome-conflict'],
      ['recorded', null],
      ['recorded', null],
    ]);
    // PostgreSQL's text cannot hold NUL: refused on either store, naming the field
    expect(odd.items[0]!.problem!.errors).toEqual([{ pointer: '#/items/0/source', detail: 'must not contain the NUL character (U+0000)' }]);
    expect(odd.recorded).toBe(3);
  });

  it('answers the same outcomes report, JSON and page, the same listing and the same drift report figures', async () => {
    const [a, b] = await both(async (s) => {
      const res = await s.app.inject(`/v1/models/${MODEL}/outcomes-report?${WINDOW}`);
      expect(res.statusCode).toBe(200);
      return comparable(s, res.json());
    });
    expect(a).toMatchObject({ scored: 1999, labelled: 668 });
    expect(b).toEqual(a);
    const pages = await both(async (s) => {
      const res = await s.app.inject(`/v1/models/${MODEL}/outcomes-report.html?${WINDOW}`);
      expect(res.statusCode).toBe(200);
      return res.body.replace(/\d{4}-\d\d-\d\dT[\d:.]+Z/g, 'T');
    });
    expect(pages[0]).toContain('<svg');
    expect(pages[1]).toEqual(pages[0]);

    const [la, lb] = await both(async (s) => {
      const res = await s.app.inject(`/v1/requests?model=${MODEL}&limit=200`);
      expect(res.statusCode).toBe(200);
      return (res.json().items as Array<{ tags: { shot: string }; outcome: unknown }>).map((i) => [i.tags.shot, i.outcome]);
    });
    expect(la.filter(([, o]) => o !== null)).toHaveLength(67);
    expect(lb).toEqual(la);

    const [da, db] = await both(async (s) => {
      const res = await s.app.inject({ method: 'POST', url: '/v1/drift-reports', payload: { model: MODEL, from: new Date(DAY_START).toISOString(), to: new Date(DAY_END).toISOString() } });
      expect(res.statusCode).toBe(201);
      return comparable(s, res.json().outcomes);
    });
    expect(da).toMatchObject({ labelled: 668, accuracy: (a as { accuracy: unknown }).accuracy });
    expect(db).toEqual(da);
  });

  it('gives the alert signals on outcomes the same values', async () => {
    const [a, b] = await both(async (s) => {
      await s.app.alerting.tick(DAY_END);
      return s.app.alerting.evaluator.states().map((st) => [st.rule, st.value, st.requests]);
    });
    expect(a.find(([rule]) => rule === 'few-outcomes')).toEqual(['few-outcomes', expect.closeTo(668 / 1999, 14), 1999]);
    expect(b).toEqual(a);
  });

  it('compares a candidate through POST /v1/models/{name}/compare the same way', async () => {
    const bundle = readFileSync(BUNDLE, 'utf8');
    const [a, b] = await both(async (s) => {
      const res = await s.app.inject({ method: 'POST', url: `/v1/models/${MODEL}/compare?${WINDOW}`, headers: { 'content-type': 'application/json' }, payload: bundle });
      expect(res.statusCode).toBe(200);
      return comparable(s, res.json());
    });
    expect(a).toMatchObject({ rows: 1999, labelled: 668, agreement: { rate: 1 } });
    expect(b).toEqual(a);
  });

  it('leaves every item of a batch unrecorded when its transaction fails in the middle, with a 503', async () => {
    const pg = sides[1] as Side;
    const [x, y] = [pg.day.shots[3]!, pg.day.shots[4]!];
    // A write that fails at the second item's row, as a full disk or a lost server would stop it there.
    await sql(pg.db, `CREATE FUNCTION fail_second() RETURNS trigger LANGUAGE plpgsql AS $$ BEGIN IF NEW.request_id = '${y.requestId}' THEN RAISE EXCEPTION 'disk I/O error'; END IF; RETURN NEW; END $$`);
    await sql(pg.db, 'CREATE TRIGGER fail_second BEFORE INSERT ON outcomes FOR EACH ROW EXECUTE FUNCTION fail_second()');
    const before = await sql<{ n: number }>(pg.db, 'SELECT COUNT(*)::int AS n FROM outcomes');
    const items = [{ request_id: x.requestId, label: x.outcome }, { request_id: y.requestId, label: y.outcome }];
    const res = await pg.app.inject({ method: 'POST', url: '/v1/outcomes', payload: { items } });
    expect(res.statusCode).toBe(503);
    expect(res.json()).toMatchObject({ type: 'urn:plumbline:problem:outcomes-unavailable' });
    expect(res.json().detail).toMatch(/disk I\/O error/);
    expect(await sql(pg.db, 'SELECT COUNT(*)::int AS n FROM outcomes')).toEqual(before);
    await sql(pg.db, 'DROP TRIGGER fail_second ON outcomes');
    const retry = await pg.app.inject({ method: 'POST', url: '/v1/outcomes', payload: { items } });
    expect(retry.json().items.map((i: { status: string }) => i.status)).toEqual(['recorded', 'recorded']);
  });

  it('exports, compares and verifies from the command line on the URL as on the file', async () => {
    // The SQLite service let go of its file first, as a CLI run beside a server would find it.
    await sides[0]!.app.close();
    // The same two outcomes the PostgreSQL side recorded after the failed batch, so that both logs hold the same.
    const sq = sides[0] as Side;
    const pg = sides[1] as Side;
    const runtime = await openRuntime(configSchema.parse({ db: sq.db, models_dir: 'demo-data/models', reports: { schedule: 'off' } }));
    const app = await buildApp(runtime);
    await app.ready();
    sides[0] = { ...sq, app };
    const items = (s: Side) => [3, 4].map((k) => ({ request_id: s.day.shots[k]!.requestId, label: s.day.shots[k]!.outcome }));
    expect((await app.inject({ method: 'POST', url: '/v1/outcomes', payload: { items: items(sq) } })).json().recorded).toBe(2);
    await app.close();

    const csv = await both(async (s) => {
      const out = tmp.file(`${s.name}.csv`);
      const summary = await exportAction({ db: s.db, model: MODEL, from: new Date(DAY_START), to: new Date(DAY_END), outcomes: 'any', out }, quiet());
      expect(summary).toMatchObject({ rows: 1999, labelled: 670 });
      // request ids differ between the two logs: the shot stands in for each
      return readFileSync(out, 'utf8').split('\n').map((line) => line.replace(/^[^,]+/, (id) => s.shotOf.get(id) ?? id));
    });
    expect(csv[0]).toHaveLength(2001);
    expect(csv[1]).toEqual(csv[0]);

    const reports = await both(async (s) => comparable(s, await compareAction({ db: s.db, model: MODEL, candidate: BUNDLE, from: new Date(DAY_START), to: new Date(DAY_END) }, quiet())));
    expect(reports[0]).toMatchObject({ rows: 1999, labelled: 670, mcnemar: { current_only: 0, candidate_only: 0, p_value: 1 } });
    expect(reports[1]).toEqual(reports[0]);

    const file = auditVerifyAction({ db: sq.db, json: true, headFile: false }, quiet());
    const server = await auditVerifyServerAction({ db: pg.db, json: true }, quiet());
    expect(file.outcomes).toMatchObject({ intact: true, rows: 671 });
    expect(server).toMatchObject({ intact: true, rows: 1999, outcomes: { intact: true, rows: 671, head: { seq: 671 } } });
    // an outcome changed on the server is found, and the log is then not intact
    await sql(pg.db, "UPDATE outcomes SET source = 'gauge 9' WHERE seq = 100");
    const t = quiet();
    const broken = await auditVerifyServerAction({ db: pg.db, json: false }, t);
    expect(broken).toMatchObject({ intact: false, outcomes: { intact: false, rows: 99, problem: { kind: 'changed', seq: 100 } } });
    expect(t.stdout.text()).toContain('outcomes NOT intact: changed at outcome 100');
    // the same change on the file says the same
    const rw = new BetterSqlite3(sq.db);
    rw.prepare("UPDATE outcomes SET source = 'gauge 9' WHERE seq = 100").run();
    rw.close();
    expect(auditVerifyAction({ db: sq.db, json: true, headFile: false }, quiet())).toMatchObject({ intact: false, outcomes: { intact: false, rows: 99, problem: { kind: 'changed', seq: 100 } } });
  });
});
