// The service over the PostgreSQL store, through HTTP: keys made with `plumbline keys --db URL`
// and their roles, scoring, the audit log's pages, an on-demand drift report and its page, and
// `audit verify --db URL` on what was written. Skipped without a PostgreSQL server.
import type { FastifyInstance } from 'fastify';
import { afterAll, describe, expect, it } from 'vitest';
import { auditVerifyServerAction } from '../../src/cli/actions/audit.js';
import { createKeyAction, revokeKeyAction } from '../../src/cli/actions/keys.js';
import { configSchema } from '../../src/config/config.js';
import { buildApp } from '../../src/http/app.js';
import { openRuntime } from '../../src/runtime.js';
import { SHOT } from '../helpers/scoring-load.js';
import { freshDatabase, serverUrl } from '../helpers/postgres.js';
import { sink } from '../helpers/sink.js';

const quiet = () => ({ stdout: sink(), stderr: sink(), interactive: false });
let app: FastifyInstance | null = null;
afterAll(async () => {
  await app?.close();
});

describe.skipIf(serverUrl === null)('the service on PostgreSQL', () => {
  it('asks for keys made on the server, scores, pages the log, reports drift, and verifies', async () => {
    const db = await freshDatabase();
    const admin = await createKeyAction({ db, role: 'admin', label: 'ops' }, quiet());
    const scorer = await createKeyAction({ db, role: 'scorer', label: 'line-3 app' }, quiet());
    const reader = await createKeyAction({ db, role: 'reader', label: 'quality engineer' }, quiet());
    const runtime = await openRuntime(configSchema.parse({ db, models_dir: 'demo-data/models', reports: { schedule: 'off' } }));
    app = await buildApp(runtime);
    await app.ready();
    const as = (key: string) => ({ authorization: `Bearer ${key}` });
    const score = (key?: string) => app!.inject({ method: 'POST', url: '/v1/models/moulding-quality/score', headers: key ? as(key) : {}, payload: { features: SHOT, tags: { line: '3' } } });

    expect((await score()).statusCode).toBe(401);
    expect((await score(reader.key)).statusCode).toBe(403);
    const ids: string[] = [];
    for (let i = 0; i < 5; i++) {
      const r = await score(scorer.key);
      expect(r.statusCode).toBe(200);
      ids.push(r.json().request_id);
    }
    const batch = await app.inject({ method: 'POST', url: '/v1/models/moulding-quality/score-batch', headers: as(scorer.key), payload: { items: [{ features: SHOT }, { features: SHOT }] } });
    expect(batch.statusCode).toBe(200);

    const page = await app.inject({ url: '/v1/requests?limit=3&tag=line:3', headers: as(reader.key) });
    expect(page.statusCode).toBe(200);
    expect(page.json().items.map((i: { request_id: string }) => i.request_id)).toEqual(ids.slice(-3).reverse());
    expect(page.json().items[0]).toMatchObject({ key_label: 'line-3 app', model: { name: 'moulding-quality' }, tags: { line: '3' } });
    const next = await app.inject({ url: `/v1/requests?limit=3&tag=line:3&cursor=${page.json().next_cursor}`, headers: as(reader.key) });
    expect(next.json().items.map((i: { request_id: string }) => i.request_id)).toEqual(ids.slice(0, 2).reverse());

    const now = Date.now();
    const report = await app.inject({ method: 'POST', url: '/v1/drift-reports', headers: as(admin.key), payload: { model: 'moulding-quality', from: new Date(now - 3_600_000).toISOString(), to: new Date(now + 60_000).toISOString() } });
    expect(report.statusCode).toBe(201);
    expect(report.json().counts).toMatchObject({ scored: 7 });
    const html = await app.inject({ url: `/v1/drift-reports/${report.json().id}.html`, headers: as(reader.key) });
    expect(html.statusCode).toBe(200);

    // revoked on the server: refused on the next request
    await revokeKeyAction({ db, id: reader.id }, quiet());
    expect((await app.inject({ url: '/v1/requests?limit=1', headers: as(reader.key) })).statusCode).toBe(401);

    const verdict = await auditVerifyServerAction({ db, json: false }, quiet());
    expect(verdict).toMatchObject({ intact: true, rows: 7, head: { seq: 7 } });
  }, 60_000);

  it('finds rows by tag when another row holds a NUL in a tag value or the pair inside a key', async () => {
    const db = await freshDatabase();
    const runtime = await openRuntime(configSchema.parse({ db, models_dir: 'demo-data/models', reports: { schedule: 'off' } }));
    const own = await buildApp(runtime);
    try {
      await own.ready();
      const score = async (tags: Record<string, string>): Promise<string> => {
        const r = await own.inject({ method: 'POST', url: '/v1/models/moulding-quality/score', payload: { features: SHOT, tags } });
        expect(r.statusCode).toBe(200);
        return r.json().request_id as string;
      };
      const a = await score({ line: '3' });
      // jsonb cannot hold this value: a cast of its row would fail every tag query
      const c = await score({ line: '3', note: 'a\u0000b' });
      // its text holds "line":"3" (after the escaped quote of the key), yet it has no tag line
      await score({ 'xx"line': '3' });
      const d = await score({ line: '3' });
      const page = (url: string) => own.inject({ url }).then((r) => {
        expect(r.statusCode).toBe(200);
        return r.json() as { items: Array<{ request_id: string; tags: Record<string, string> }>; next_cursor: string | null };
      });
      const all = await page('/v1/requests?tag=line:3');
      expect(all.items.map((i) => i.request_id)).toEqual([d, c, a]);
      expect(all.items[1]?.tags.note).toBe('a\u0000b');
      // one a page: the row that only looks like a match is passed over, not counted
      const ids: string[] = [];
      let cursor: string | null = null;
      do {
        const p = await page(`/v1/requests?tag=line:3&limit=1${cursor ? `&cursor=${cursor}` : ''}`);
        ids.push(...p.items.map((i) => i.request_id));
        cursor = p.next_cursor;
      } while (cursor !== null);
      expect(ids).toEqual([d, c, a]);
      expect((await page(`/v1/requests?tag=${encodeURIComponent('xx"line:3')}`)).items).toHaveLength(1);
    } finally {
      await own.close();
    }
  }, 60_000);
});
