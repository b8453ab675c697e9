import { execFile } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { promisify } from 'node:util';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { compareAction } from '../../src/cli/actions/compare.js';
import { exportAction } from '../../src/cli/actions/export.js';
import { trainAction } from '../../src/cli/actions/train.js';
import type { CliIo } from '../../src/cli/io.js';
import { TRAIN_DEFAULTS } from '../../src/cli/commands/train.js';
import { compareReportSchema } from '../../src/contracts/compare-report.js';
import { mcnemarExact } from '../../src/core/stats/exact-tests.js';
import { sealBundle } from '../../src/bundle/verify.js';
import { recordDemoOutcomes } from '../../src/demo/outcomes.js';
import { replayDemoDay } from '../../src/demo/replay.js';
import { fromFloat64Blob } from '../../src/store/float64-blob.js';
import { tempDir } from '../helpers/datasets.js';
import { DAY_END, DAY_START, DEMO_DIR, demoBundle } from '../helpers/demo.js';
import { startTestService } from '../helpers/service.js';
import { sink } from '../helpers/sink.js';

const run = promisify(execFile);
const tmp = tempDir();
const db = tmp.file('demo.db');
const DEMO_BUNDLE = `${DEMO_DIR}models/moulding-quality.bundle.json`;
const HOUR = 3_600_000;
const day = { from: new Date(DAY_START), to: new Date(DAY_END) };
/** After the rows the retrained bundle learnt from. */
const evening = { from: new Date(DAY_START + 15 * HOUR), to: new Date(DAY_END) };

function io(): CliIo & { out: ReturnType<typeof sink>; err: ReturnType<typeof sink> } {
  const out = sink();
  const err = sink();
  return { stdout: out, stderr: err, interactive: false, out, err };
}

beforeAll(async () => {
  // The demo day with its inspection results, in a database file the commands then read.
  const svc = await startTestService({ bundles: [demoBundle()], dbFile: db });
  const replayed = await replayDemoDay(svc.app.scoring, 'moulding-quality', DEMO_DIR, DAY_START);
  await recordDemoOutcomes(svc.store.outcomes, 'moulding-quality', replayed.shots);
  await svc.app.close();
  svc.db.close();
}, 60_000);
afterAll(() => tmp.remove());

describe('plumbline export', () => {
  it('writes the labelled vectors exactly as logged, with their outcome in label, and train reads the file with --ignore', async () => {
    const out = tmp.file('labelled.csv');
    const summary = await exportAction({ db, model: 'moulding-quality', ...day, outcomes: 'only', out }, io());
    expect(summary).toMatchObject({ rows: 666, labelled: 666, otherFeatures: 0 });
    const lines = readFileSync(out, 'utf8').trim().split('\n');
    expect(lines[0]).toBe('request_id,received_at,melt_temp_c,mould_temp_c,injection_pressure_bar,hold_pressure_bar,hold_time_s,cooling_time_s,screw_speed_rpm,cushion_mm,cycle_time_s,shot_weight_g,label');
    expect(lines).toHaveLength(667);
    // every value reads back to the float64 stored, every label is the outcome recorded
    const raw = new BetterSqlite3(db, { readonly: true });
    const byId = raw.prepare('SELECT s.features, (SELECT label FROM outcomes o WHERE o.request_id = s.request_id ORDER BY seq DESC LIMIT 1) AS outcome FROM scored_requests s WHERE s.request_id = ?');
    for (const line of lines.slice(1)) {
      const f = line.split(',');
      const row = byId.get(f[0]) as { features: Buffer; outcome: string };
      expect(f.slice(2, 12).map(Number)).toEqual(Array.from(fromFloat64Blob(row.features)));
      expect(f[12]).toBe(row.outcome);
    }
    raw.close();
    const all = await exportAction({ db, model: 'moulding-quality', ...day, outcomes: 'any', out: tmp.file('all.csv') }, io());
    expect(all).toMatchObject({ rows: 1999, labelled: 666 });
    expect(readFileSync(tmp.file('all.csv'), 'utf8').split('\n').filter((l) => l.endsWith(',')).length).toBe(1999 - 666);

    // A bundle retrained on the outcomes up to 15:00; the comparisons below rescore the rest of the day.
    const morning = tmp.file('morning.csv');
    const m = await exportAction({ db, model: 'moulding-quality', from: day.from, to: new Date(DAY_START + 15 * HOUR), outcomes: 'only', out: morning }, io());
    const t = io();
    await trainAction({ ...TRAIN_DEFAULTS, detectors: [...TRAIN_DEFAULTS.detectors], data: morning, label: 'label', ignore: ['request_id', 'received_at'], name: 'moulding-quality', version: '2', out: tmp.file('retrained.bundle.json'), createdAt: new Date('2026-12-02T06:00:00Z') }, t);
    expect(t.err.text()).toMatch(new RegExp(`^read ${m.rows} rows, 10 features, 5 classes from `));
  }, 120_000);

  it('refuses a missing file and a model the log never held, as usage errors', async () => {
    await expect(exportAction({ db: tmp.file('none.db'), model: 'moulding-quality', ...day, outcomes: 'only', out: tmp.file('x.csv') }, io())).rejects.toThrow(/no such file/);
    await expect(exportAction({ db, model: 'press-9', ...day, outcomes: 'only', out: tmp.file('x.csv') }, io())).rejects.toThrow(/holds no bundle for a model named "press-9"/);
  });
});

describe('plumbline compare', () => {
  it('finds the logged bundle in full agreement with itself: same labels, same in-domain share, McNemar p = 1', async () => {
    const r = await compareAction({ db, model: 'moulding-quality', candidate: DEMO_BUNDLE, ...day }, io());
    expect(compareReportSchema.safeParse(r).error).toBeUndefined();
    expect([r.rows, r.skipped, r.agreement.rows, r.labelled]).toEqual([1999, 0, 1999, 666]);
    expect(r.in_domain.candidate).toBe(r.in_domain.current);
    expect(r.mcnemar).toEqual({ current_only: 0, candidate_only: 0, p_value: 1 });
    // off the diagonal of the label table: nothing
    r.labels.counts.forEach((row, i) => row.forEach((c, j) => r.labels.current[i] !== r.labels.candidate[j] && expect(c).toBe(0)));
  }, 60_000);

  it('compares a bundle retrained on the exported outcomes, with the counts McNemar is computed from', async () => {
    const html = tmp.file('compare.html');
    const json = tmp.file('compare.json');
    const t = io();
    const r = await compareAction({ db, model: 'moulding-quality', candidate: tmp.file('retrained.bundle.json'), ...evening, json, html }, t);
    expect(r.candidate.version).toBe('2');
    const [n] = new BetterSqlite3(db, { readonly: true }).prepare('SELECT COUNT(*) AS n FROM scored_requests WHERE received_at >= ? AND received_at < ?').all(evening.from.getTime(), evening.to.getTime()) as Array<{ n: number }>;
    expect(r.rows).toBe(n?.n);
    expect(r.labels.counts.flat().reduce((a, b) => a + b, 0)).toBe(r.rows);
    expect(r.mcnemar.p_value).toBe(mcnemarExact(r.mcnemar.current_only, r.mcnemar.candidate_only));
    // the accuracies differ by exactly the discordant rows
    const diff = ((r.accuracy.candidate.value as number) - (r.accuracy.current.value as number)) * r.labelled;
    expect(Math.round(diff)).toBe(r.mcnemar.candidate_only - r.mcnemar.current_only);
    expect(JSON.parse(readFileSync(json, 'utf8'))).toEqual(r);
    expect(readFileSync(html, 'utf8')).toContain('McNemar');
    expect(t.out.text()).toMatch(/^compare: moulding-quality as logged \(version 1\) against moulding-quality version 2 \(/);
    expect(t.out.text()).toContain(`with an outcome ${r.labelled}: right, logged `);
  }, 60_000);

  it('refuses a candidate that takes other features, and runs from the command line', async () => {
    const { sha256: _, ...body } = JSON.parse(readFileSync(DEMO_BUNDLE, 'utf8'));
    body.features[0].name = 'barrel_temp_c';
    body.reference.features[0].name = 'barrel_temp_c';
    const bad = tmp.file('other.bundle.json', JSON.stringify(sealBundle(body)));
    await expect(compareAction({ db, model: 'moulding-quality', candidate: bad, ...day }, io())).rejects.toThrow(/--candidate .*other.bundle.json: the candidate takes features \(barrel_temp_c, mould_temp_c, .*\) that the logged answers of moulding-quality in the window do not all have/);
    const cli = await run('npx', ['tsx', 'src/cli/main.ts', 'compare', '--db', db, '--model', 'moulding-quality', '--candidate', DEMO_BUNDLE, '--from', '2026-11-30', '--to', '2026-12-01'], { cwd: new URL('../../', import.meta.url).pathname });
    expect(cli.stdout).toContain('rescored 1999 (left out 0); same label 100.0%');
  }, 60_000);
});
