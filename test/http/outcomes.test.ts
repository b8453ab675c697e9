import BetterSqlite3 from 'better-sqlite3';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { SETOSA, type TestService, VIRGINICA, startTestService } from '../helpers/service.js';

async function score(svc: TestService, features: Record<string, number>, tags?: Record<string, string>): Promise<{ request_id: string; label: string }> {
  const res = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: { features, ...(tags ? { tags } : {}) } });
  expect(res.statusCode).toBe(200);
  return res.json();
}

const post = (svc: TestService, items: unknown[]) => svc.app.inject({ method: 'POST', url: '/v1/outcomes', payload: { items } });
const outcomeRows = (svc: TestService) => svc.rows('SELECT seq, request_id, label, observed_at, source, replaces FROM outcomes ORDER BY seq');

describe('POST /v1/outcomes', () => {
  let svc: TestService;
  beforeEach(async () => {
    svc = await startTestService();
  });
  afterEach(async () => {
    await svc.close();
  });

  it('records outcomes by request id and by tag, and GET /v1/requests shows each answer its outcome', async () => {
    const a = await score(svc, SETOSA, { serial: 'A-1' });
    const b = await score(svc, VIRGINICA, { serial: 'A-2' });
    const c = await score(svc, VIRGINICA, { serial: 'A-3' });
    const res = await post(svc, [
      { request_id: a.request_id, label: 'setosa', observed_at: '2026-12-04T10:00:00+01:00', source: 'inspection 3' },
      { tag: { serial: 'A-2' }, label: 'versicolor' },
    ]);
    expect(res.statusCode).toBe(200);
    expect(res.json()).toEqual({
      recorded: 2,
      items: [
        { index: 0, request_id: a.request_id, status: 'recorded' },
        { index: 1, request_id: b.request_id, status: 'recorded' },
      ],
    });
    expect(outcomeRows(svc)).toEqual([
      { seq: 1, request_id: a.request_id, label: 'setosa', observed_at: Date.parse('2026-12-04T09:00:00Z'), source: 'inspection 3', replaces: null },
      { seq: 2, request_id: b.request_id, label: 'versicolor', observed_at: null, source: null, replaces: null },
    ]);
    const listed = (await svc.app.inject('/v1/requests')).json() as { items: Array<{ request_id: string; outcome: unknown }> };
    const by = Object.fromEntries(listed.items.map((i) => [i.request_id, i.outcome]));
    expect(by[a.request_id]).toEqual({ label: 'setosa', observed_at: '2026-12-04T09:00:00.000Z' });
    expect(by[b.request_id]).toEqual({ label: 'versicolor', observed_at: null });
    expect(by[c.request_id]).toBeNull();
  });

  it('refuses a bad item with its own problem and records the others of the batch', async () => {
    const a = await score(svc, SETOSA, { serial: 'B-1' });
    const b = await score(svc, VIRGINICA, { serial: 'dup' });
    await score(svc, SETOSA, { serial: 'dup' });
    const res = await post(svc, [
      { request_id: a.request_id, label: 'setosa' },
      { request_id: '0190f0c4-0000-7000-8000-000000000000', label: 'setosa' },
      { request_id: b.request_id, label: 'daisy' },
      { tag: { serial: 'dup' }, label: 'setosa' },
      { tag: { serial: 'none' }, label: 'setosa' },
      { label: 'setosa' },
      { request_id: b.request_id, label: 'virginica', observed_at: 'yesterday' },
      { request_id: b.request_id, label: 'virginica' },
    ]);
    expect(res.statusCode).toBe(200);
    const body = res.json() as { recorded: number; items: Array<{ status: string; problem?: { type: string; status: number; detail: string; errors?: Array<{ pointer: string }> } }> };
    expect(body.recorded).toBe(2);
    expect(body.items.map((i) => i.status)).toEqual(['recorded', 'refused', 'refused', 'refused', 'refused', 'refused', 'refused', 'recorded']);
    const problem = (i: number) => body.items[i]?.problem;
    expect([1, 2, 3, 4, 5, 6].map((i) => [problem(i)?.type, problem(i)?.status])).toEqual([
      ['urn:plumbline:problem:unknown-request', 404],
      ['urn:plumbline:problem:unknown-label', 422],
      ['urn:plumbline:problem:ambiguous-tag', 409],
      ['urn:plumbline:problem:unknown-tag', 404],
      ['urn:plumbline:problem:invalid-request', 400],
      ['urn:plumbline:problem:invalid-request', 400],
    ]);
    expect(problem(2)?.detail).toContain('whose classes are setosa, versicolor, virginica');
    expect(problem(2)?.errors?.[0]?.pointer).toBe('#/items/2/label');
    expect(problem(5)?.errors?.[0]?.pointer).toBe('#/items/5/request_id');
    expect(problem(6)?.errors?.[0]?.pointer).toBe('#/items/6/observed_at');
    expect(outcomeRows(svc).map((r) => [r.request_id, r.label])).toEqual([
      [a.request_id, 'setosa'],
      [b.request_id, 'virginica'],
    ]);
  });

  it('answers unchanged for the same label, refuses a different one with a conflict, and records it over with replace', async () => {
    const a = await score(svc, SETOSA);
    await post(svc, [{ request_id: a.request_id, label: 'setosa' }]);
    const again = (await post(svc, [{ request_id: a.request_id, label: 'setosa' }])).json();
    expect(again).toEqual({ recorded: 0, items: [{ index: 0, request_id: a.request_id, status: 'unchanged' }] });
    const other = (await post(svc, [{ request_id: a.request_id, label: 'virginica' }])).json() as { items: Array<{ problem: { type: string; status: number; detail: string } }> };
    expect(other.items[0]?.problem.type).toBe('urn:plumbline:problem:outcome-conflict');
    expect(other.items[0]?.problem.status).toBe(409);
    expect(other.items[0]?.problem.detail).toContain('"replace": true');
    const replaced = (await post(svc, [{ request_id: a.request_id, label: 'virginica', replace: true }])).json();
    expect(replaced.recorded).toBe(1);
    expect(outcomeRows(svc).map((r) => [r.seq, r.label, r.replaces])).toEqual([
      [1, 'setosa', null],
      [2, 'virginica', 1],
    ]);
    const listed = (await svc.app.inject('/v1/requests')).json() as { items: Array<{ outcome: { label: string } }> };
    expect(listed.items[0]?.outcome.label).toBe('virginica');
  });

  it('refuses a source holding the NUL character, naming its field, as the PostgreSQL store must (its text cannot hold one)', async () => {
    const a = await score(svc, SETOSA);
    const res = await post(svc, [
      { request_id: a.request_id, label: 'setosa', source: 'gauge\u0000 7' },
      { request_id: a.request_id, label: 'setosa', source: 'gauge 7' },
    ]);
    expect(res.json().items.map((i: { status: string }) => i.status)).toEqual(['refused', 'recorded']);
    expect(res.json().items[0].problem.errors).toEqual([{ pointer: '#/items/0/source', detail: 'must not contain the NUL character (U+0000)' }]);
    expect(outcomeRows(svc)).toEqual([{ seq: 1, request_id: a.request_id, label: 'setosa', observed_at: null, source: 'gauge 7', replaces: null }]);
  });

  it('refuses a body that is not a batch of 1 to limits.batch_items items as a whole, recording nothing', async () => {
    expect((await post(svc, [])).statusCode).toBe(400);
    expect((await svc.app.inject({ method: 'POST', url: '/v1/outcomes', payload: { outcomes: [] } })).statusCode).toBe(400);
    expect(outcomeRows(svc)).toEqual([]);
  });

  it('seals outcomes into a chain of their own that verification recomputes, and names a changed row', async () => {
    const a = await score(svc, SETOSA);
    const b = await score(svc, VIRGINICA);
    await post(svc, [
      { request_id: a.request_id, label: 'setosa' },
      { request_id: b.request_id, label: 'virginica' },
    ]);
    expect(svc.store.outcomes.verifyChain()).toMatchObject({ intact: true, rows: 2, head: { seq: 2 } });
    const rw = new BetterSqlite3(svc.dbFile);
    rw.prepare("UPDATE outcomes SET label = 'versicolor' WHERE seq = 2").run();
    expect(svc.store.outcomes.verifyChain()).toMatchObject({ intact: false, rows: 1, problem: { kind: 'changed', seq: 2, request_id: b.request_id } });
    rw.prepare('DELETE FROM outcomes WHERE seq = 1').run();
    expect(svc.store.outcomes.verifyChain()).toMatchObject({ intact: false, rows: 0, problem: { kind: 'removed', seq: 1 } });
    rw.close();
  });

  it('leaves every item of a batch unrecorded when the transaction fails in its middle, and says so with a 503', async () => {
    const a = await score(svc, SETOSA);
    const b = await score(svc, VIRGINICA);
    // A write that fails on the second insert, as a full disk or a crash would stop it there.
    const rw = new BetterSqlite3(svc.dbFile);
    rw.exec("CREATE TRIGGER fail_second BEFORE INSERT ON outcomes WHEN NEW.seq = 2 BEGIN SELECT RAISE(ABORT, 'disk I/O error'); END");
    const res = await post(svc, [
      { request_id: a.request_id, label: 'setosa' },
      { request_id: b.request_id, label: 'virginica' },
    ]);
    expect(res.statusCode).toBe(503);
    expect(res.json().type).toBe('urn:plumbline:problem:outcomes-unavailable');
    expect(outcomeRows(svc)).toEqual([]);
    rw.exec('DROP TRIGGER fail_second');
    rw.close();
    const retry = (await post(svc, [
      { request_id: a.request_id, label: 'setosa' },
      { request_id: b.request_id, label: 'virginica' },
    ])).json();
    expect(retry.recorded).toBe(2);
    expect(svc.store.outcomes.verifyChain()).toMatchObject({ intact: true, rows: 2 });
  });
});
