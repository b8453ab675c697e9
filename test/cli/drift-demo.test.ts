import { existsSync, readFileSync, readdirSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import BetterSqlite3 from 'better-sqlite3';
import { demoAction } from '../../src/cli/actions/demo.js';
import { driftAction } from '../../src/cli/actions/drift.js';
import { UsageError } from '../../src/cli/io.js';
import type { CliIo } from '../../src/cli/io.js';
import { DAY_END, DAY_START, demoDayService } from '../helpers/demo.js';
import { tempDir } from '../helpers/datasets.js';
import { sink } from '../helpers/sink.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const io = (): CliIo & { out: ReturnType<typeof sink> } => {
  const out = sink();
  return { stdout: out, stderr: sink(), interactive: false, out };
};

describe('plumbline drift', () => {
  let db = '';
  beforeAll(async () => {
    const svc = await demoDayService();
    db = tmp.file('audit.db');
    // a copy of the logged day, as an engineer would point the command at the service's file
    svc.store.log.flush();
    const source = new BetterSqlite3(svc.dbFile, { readonly: true });
    await source.backup(db);
    source.close();
    await svc.close();
  });

  it('reports on the database, stores the report there, prints the findings and writes JSON and HTML', async () => {
    const t = io();
    const json = tmp.file('r.json');
    const html = tmp.file('r.html');
    const report = await driftAction({ db, model: 'moulding-quality', from: new Date(DAY_START), to: new Date(DAY_END), json, html, minRows: 30, sampleCap: 10_000 }, t);
    expect(t.out.text()).toMatch(/^drift report [0-9a-f-]{36}: moulding-quality version 1, 2026-11-30T00:00:00\.000Z to 2026-12-01T00:00:00\.000Z\nverdict: shifted\n/);
    expect(t.out.text()).toMatch(/^\d\. melt_temp_c has shifted: PSI/m);
    expect(JSON.parse(readFileSync(json, 'utf8')).id).toBe(report.id);
    expect(readFileSync(html, 'utf8')).toContain('data-chart="psi"');
    const check = new BetterSqlite3(db, { readonly: true });
    expect(check.prepare('SELECT trigger FROM drift_reports WHERE id = ?').get(report.id)).toEqual({ trigger: 'cli' });
    check.close();
  });

  it('refuses an output path it cannot write before building the report, and leaves no empty file when the report fails', async () => {
    const before = new BetterSqlite3(db, { readonly: true });
    const reportsBefore = (before.prepare('SELECT COUNT(*) AS n FROM drift_reports').get() as { n: number }).n;
    before.close();
    const run = driftAction({ db, model: 'moulding-quality', from: new Date(DAY_START), to: new Date(DAY_END), html: tmp.file('no/such/dir/r.html'), minRows: 30, sampleCap: 10_000 }, io());
    await expect(run).rejects.toThrow('--html ' + tmp.file('no/such/dir/r.html') + ': cannot be written (ENOENT)');
    const after = new BetterSqlite3(db, { readonly: true });
    expect((after.prepare('SELECT COUNT(*) AS n FROM drift_reports').get() as { n: number }).n).toBe(reportsBefore);
    after.close();
    const json = tmp.file('never.json');
    await expect(driftAction({ db, model: 'press-9', from: new Date(DAY_START), to: new Date(DAY_END), json, minRows: 30, sampleCap: 10_000 }, io())).rejects.toThrow(/press-9/);
    expect(existsSync(json)).toBe(false);
  });

  it('names a model the log has never seen and a window that is empty', async () => {
    await expect(driftAction({ db, model: 'press-9', from: new Date(DAY_START), to: new Date(DAY_END), minRows: 30, sampleCap: 10_000 }, io())).rejects.toThrow(/holds no bundle for a model named "press-9"/);
    await expect(driftAction({ db, model: 'moulding-quality', from: new Date(DAY_END), to: new Date(DAY_START), minRows: 30, sampleCap: 10_000 }, io())).rejects.toThrow(/must be before --to/);
  });
});

describe('plumbline demo', () => {
  it('serves the demo bundle, replays a day, reports on it and prints where to look', async () => {
    const t = io();
    const demo = await demoAction({ host: '127.0.0.1', port: 0, exit: false, signals: false }, t);
    try {
      const text = t.out.text();
      expect(text).toMatch(/^plumbline demo: an invented injection-moulding cell/);
      expect(text).toMatch(/18:00-19:00 {5}83 shots, {3}83 out of domain {2}\(cushion transducer stuck at 0 mm\)/);
      expect(text).toContain('3. the drift report for that day (what the nightly job makes):');
      expect(text).toContain('verdict: shifted');
      expect(text).toContain(`The report, with its charts: ${demo.url}`);
      // the inspection results of every third shot, and in-domain answers right far more often
      expect(text).toContain("4. the inspection station's results, for every third shot, 40 minutes after it (as POST /v1/outcomes takes them): 666 recorded");
      expect(demo.outcomes.labelled).toBe(666);
      const d = demo.outcomes.by_domain;
      expect((d.in_domain.accuracy as number) - (d.out_of_domain.accuracy as number)).toBeGreaterThan(0.15);
      expect(text).toContain(`   1. Out-of-domain answers were right far less often: `);
      const outcomesPage = await fetch(/How right the answers were, with its charts: (\S+)/.exec(text)?.[1] as string);
      expect(outcomesPage.status).toBe(200);
      expect(await outcomesPage.text()).toContain('data-chart="reliability"');
      const page = await fetch(demo.url);
      expect(page.status).toBe(200);
      expect(await page.text()).toContain('data-verdict="shifted"');
      const ood = (await (await fetch(`${demo.server.url}/v1/requests?in_domain=false&limit=1000`)).json()) as { items: unknown[] };
      expect(ood.items.length).toBe(demo.report.counts.out_of_domain);
    } finally {
      await demo.close();
    }
    expect(existsSync(demo.server.runtime.store.file)).toBe(false);
  });

  it('says the port is taken, as a usage error, and leaves no temporary directory behind', async () => {
    const blocker = createServer();
    await new Promise<void>((resolve) => blocker.listen(0, '127.0.0.1', resolve));
    const port = (blocker.address() as { port: number }).port;
    const demoDirs = (): string[] => readdirSync(tmpdir()).filter((d) => d.startsWith('plumbline-demo-'));
    const before = demoDirs();
    try {
      const err = await demoAction({ host: '127.0.0.1', port, exit: true, signals: false }, io()).catch((e: unknown) => e);
      expect(err).toBeInstanceOf(UsageError);
      expect((err as Error).message).toBe(`cannot listen on 127.0.0.1:${port} (EADDRINUSE: another process has the port; stop it or pass --port)`);
      expect(demoDirs()).toEqual(before);
    } finally {
      await new Promise((resolve) => blocker.close(resolve));
    }
  });
});
