import BetterSqlite3 from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { replayDemoDay, type ReplaySummary } from '../../src/demo/replay.js';
import type { DriftReport } from '../../src/contracts/drift-report.js';
import { DAY_START, DEMO_DIR, demoBundle } from '../helpers/demo.js';
import { asOfDocDay, dumpOutput, examplesOf, fencedBlocks, quoteProblems, readDoc, runCommand } from '../helpers/doc-examples.js';
import { type DocServer, startDocServer } from '../helpers/doc-servers.js';

// docs/drift.md: the demo run it shows, the trimmed report, and the figures its reading of the
// invented day quotes, each recomputed from a replay of that day through the committed bundle.

const DOC = readDoc('docs/drift.md');
const DAY = 86_400_000;
const HOUR = 3_600_000;
const bundle = (() => {
  const b = demoBundle();
  if (b.format !== 'plumbline-bundle/2') throw new Error('the demo bundle is not format 2');
  return b;
})();
let svc: DocServer;
let replay: ReplaySummary;
let day: DriftReport;
let stuck: DriftReport;
const pct = (x: number, digits = 1) => `${(100 * x).toFixed(digits)} %`;

beforeAll(async () => {
  svc = await startDocServer();
  replay = await replayDemoDay(svc.server.app.scoring, 'moulding-quality', DEMO_DIR, DAY_START);
  day = await svc.server.app.reports.run('moulding-quality', { from: DAY_START, to: DAY_START + DAY }, 'demo');
  stuck = await svc.server.app.reports.run('moulding-quality', { from: DAY_START + 18 * HOUR, to: DAY_START + 19 * HOUR }, 'request');
}, 120_000);
afterAll(async () => {
  await svc.close();
});

describe('docs/drift.md', () => {
  it('shows what plumbline demo prints (run here as written)', async () => {
    const e = examplesOf(DOC).find((x) => x.command.includes(' demo '));
    expect(e).toBeDefined();
    const run = await runCommand((e?.command ?? '').replace('--port 18401', '--port 0'), {}, { stdoutOnly: true });
    const output = asOfDocDay(run.output, 'http://127.0.0.1:18401');
    dumpOutput('drift.md', e as NonNullable<typeof e>, output);
    const problems = quoteProblems(output, e?.output ?? '');
    expect(problems, problems.join('\n')).toEqual([]);
    expect(run.code).toBe(0);
  });

  it('shows a trimmed report of that day, its shares shortened to four digits', () => {
    const block = fencedBlocks(DOC).find((b) => b.lang === 'json' && b.body.includes('"findings"'));
    const problems = quoteProblems(JSON.stringify(day), block?.body ?? '', { rounded: true });
    expect(problems, problems.join('\n')).toEqual([]);
  });

  it('gives the expected rate the binomial tests use for the demo bundle', () => {
    const h = bundle.domain.held_out;
    expect(DOC).toContain(`For the demo bundle the measured rate is ${h.false_alarm_rate} (${Math.round(h.false_alarm_rate * h.rows)} of ${h.rows.toLocaleString('en')}\nout-of-fold rows failed the flag, calibrated to pass ${h.level * 100} %) and the upper end ${h.false_alarm_ci?.high}.`);
    expect(day.out_of_domain.expected_ci_high).toBe(h.false_alarm_ci?.high);
  });

  it("gives the nightly job's log line for the day", () => {
    expect(DOC).toContain(`"verdict":"${day.verdict}","scored":${day.counts.scored},`);
  });

  it('reads the day with the figures of the replay and its report', () => {
    const [morning, afternoon, , evening] = replay.byStretch.map((s) => s.outOfDomain);
    const o = day.out_of_domain;
    const h = bundle.domain.held_out;
    expect(DOC).toContain(`**Out-of-domain answers, ${pct(o.rate ?? 0, 2)} against ${pct(o.expected_rate ?? 0, 2)}.** Calibration measured ${Math.round(h.false_alarm_rate * h.rows)} false alarms in\n   the ${h.rows.toLocaleString('en')} out-of-fold rows (${pct(h.false_alarm_rate, 2)}, at most ${pct(h.false_alarm_ci?.high ?? 0, 2)} at 95 %). The day had ${day.counts.out_of_domain} of ${day.counts.scored.toLocaleString('en')}.`);
    expect(DOC).toContain(`normal morning gave ${morning} of 1,000`);
    expect(DOC).toContain(`noon: ${(afternoon ?? 0) + (evening ?? 0)} in the hotter-barrel hours and all 83 shots of the stuck-sensor hour`);
    expect(DOC).toContain(`Wilson interval (${pct(o.ci_low ?? 0, 2)}–${pct(o.ci_high ?? 0, 1)})`);

    // The hour findings: drifted hours flagged, and the others of the new lot.
    const flagged = day.findings.map((f) => /^Between (\d\d):00 and \d\d:00 UTC on \S+, (\d+) of 83/.exec(f)).filter((m) => m !== null && m[1] !== '18');
    const counts = flagged.map((m) => Number(m?.[2]));
    expect(DOC).toContain(`4. **Findings 4 to ${3 + flagged.length}: four hotter-barrel hours, ${Math.min(...counts)} to ${Math.max(...counts)} of 83 out of domain.**`);
    expect(flagged).toHaveLength(4);
    const flaggedHours = new Set(flagged.map((m) => m?.[1]));
    const others = day.hourly.filter((x) => Number(x.hour.slice(11, 13)) >= 12 && x.hour.slice(11, 13) !== '18' && !flaggedHours.has(x.hour.slice(11, 13))).map((x) => x.out_of_domain);
    expect(DOC).toContain(`The other drifted hours, at ${Math.min(...others)} or ${Math.max(...others)} of 83,`);

    const melt = bundle.features.findIndex((f) => f.name === 'melt_temp_c');
    const cushion = bundle.features.findIndex((f) => f.name === 'cushion_mm');
    expect(DOC).toContain(`envelope's high bound of ${bundle.domain.envelope.high[melt]} degC`);
    expect(DOC).toContain(`against a low bound of ${bundle.domain.envelope.low[cushion]} mm`);
    const c = day.features.find((f) => f.name === 'cushion_mm');
    expect(DOC).toContain(`its PSI\n   is ${c?.psi?.toFixed(3)}, \`${c?.band}\``);
    expect(DOC).toContain(`lowest training bin (up to ${c?.bins.edges[0]} mm) and raise it\n   only from ${pct(c?.bins.reference[0] ?? 0)} to ${pct(c?.bins.window[0] ?? 0)}`);
    expect(DOC).toContain(`The Wasserstein distance, ${c?.wasserstein?.toFixed(2)} training SD`);

    const p = day.predictions;
    expect(DOC).toContain(`\`flash\` for ${pct(p.fractions.flash ?? 0)} of shots against ${pct(p.reference_fractions.flash ?? 0, 2)}`);
    expect(DOC).toContain(`\`sink_marks\` answers: ${Math.round((stuck.predictions.fractions.sink_marks ?? 0) * 83)} of its 83`);
  });

  it('gives the margins of the day, per stretch of it', () => {
    const m = day.margin;
    const db = new BetterSqlite3(svc.server.app.config.db, { readonly: true });
    const mean = (fromHour: number, toHour: number) =>
      (db.prepare('SELECT avg(margin) AS m FROM scored_requests WHERE received_at >= ? AND received_at < ?').get(DAY_START + fromHour * HOUR, DAY_START + toHour * HOUR) as { m: number }).m;
    const hot = (db.prepare('SELECT avg(margin) AS m FROM scored_requests WHERE received_at >= ? AND received_at < ? AND NOT (received_at >= ? AND received_at < ?)').get(DAY_START + 12 * HOUR, DAY_START + DAY, DAY_START + 18 * HOUR, DAY_START + 19 * HOUR) as { m: number }).m;
    const morning = mean(0, 12);
    const stuckHour = mean(18, 19);
    db.close();
    expect(DOC).toContain(`Their mean over the day is ${m.mean?.toFixed(3)} against ${m.reference_mean?.toFixed(3)} on the held-out\nanswers at training (KS p = ${m.ks.p_value?.toFixed(2)}): the normal morning's shots average ${morning.toFixed(3)}, the hotter-barrel\nshots ${hot.toFixed(3)} and the stuck-sensor shots ${stuckHour.toFixed(3)}.`);
    expect(DOC).toContain(`${pct(m.review_rate ?? 0)} of answers\nwere marked for review, the ${day.counts.out_of_domain} out-of-domain answers among them.`);
    expect(day.findings.some((f) => f.startsWith('Margins'))).toBe(false);
  });
});
