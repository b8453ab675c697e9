import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildDriftReport } from '../../src/reports/build-report.js';
import { REPORT_DEFAULTS } from '../../src/reports/options.js';
import { writeFindings } from '../../src/reports/findings.js';
import type { DriftReport } from '../../src/contracts/drift-report.js';
import { DAY_END, DAY_START, demoDayService } from '../helpers/demo.js';
import type { TestService } from '../helpers/service.js';

let svc: TestService;
let report: DriftReport;
const bundle = () => svc.registry.get('moulding-quality')!.bundle;
beforeAll(async () => {
  svc = await demoDayService();
  report = await buildDriftReport(svc.store.drift, bundle(), { from: DAY_START, to: DAY_END }, { id: 'r1', createdAt: new Date('2026-12-01T02:00:00Z') });
});
afterAll(async () => {
  await svc.close();
});

describe('drift report over the invented demo day (normal morning, resin-lot change at noon, stuck cushion sensor 18:00-19:00)', () => {
  it('counts every scored row of the window, and as many out of domain as the inserted rows hold', () => {
    // Counted here over the test's own read-only connection, not through the report's queries.
    const [counted] = svc.rows(`SELECT COUNT(*) AS n, SUM(in_domain = 0) AS out FROM scored_requests WHERE received_at >= ${DAY_START} AND received_at < ${DAY_END}`) as Array<{ n: number; out: number }>;
    expect(counted!.n).toBe(1999);
    expect(counted!.out).toBeGreaterThan(60);
    expect(report.counts).toEqual({ scored: 1999, rejected: 0, out_of_domain: counted!.out, other_versions: 0 });
    expect(report.features.every((f) => f.n === 1999)).toBe(true);
  });

  it('finds the drifted feature shifted and no other feature shifted', () => {
    const byName = Object.fromEntries(report.features.map((f) => [f.name, f]));
    expect(byName.melt_temp_c!.band).toBe('shifted');
    expect(byName.melt_temp_c!.p_adjusted).toBeLessThan(1e-10);
    expect(report.features.filter((f) => f.band === 'shifted').map((f) => f.name)).toEqual(['melt_temp_c']);
    // melt temperature +7 degC on 916 of 1999 rows: about 3.2 degC on the mean
    expect(byName.melt_temp_c!.mean! - byName.melt_temp_c!.reference_mean).toBeGreaterThan(2.5);
    expect(byName.melt_temp_c!.mean! - byName.melt_temp_c!.reference_mean).toBeLessThan(4);
  });

  it('shows the faulted hour in the hourly series', () => {
    const hours = Object.fromEntries(report.hourly.map((h) => [h.hour, h]));
    const faulted = hours['2026-11-30T18:00:00.000Z']!;
    expect(faulted.out_of_domain).toBe(faulted.scored);
    expect(hours['2026-11-30T06:00:00.000Z']!.out_of_domain).toBeLessThan(5);
    expect(report.findings.some((f) => f.startsWith('Between 18:00 and 19:00 UTC on 2026-11-30'))).toBe(true);
  });

  it('tests the out-of-domain rate against the false-alarm rate measured at calibration', () => {
    const o = report.out_of_domain;
    expect(o.expected_rate).toBe(bundle().file.domain.held_out.false_alarm_rate);
    expect(o.rate).toBeCloseTo(report.counts.out_of_domain / 1999, 15);
    expect(o.ci_low!).toBeLessThan(o.rate!);
    expect(o.ci_high!).toBeGreaterThan(o.rate!);
    expect(o.p_value).toBeLessThan(1e-10);
    expect(report.verdict).toBe('shifted');
  });

  it('compares predicted classes with the held-out answers at training: more flash after the hotter barrel', () => {
    expect(report.predictions.fractions.flash!).toBeGreaterThan(2 * report.predictions.reference_fractions.flash!);
    expect(report.predictions.chi_square.p_value).toBeLessThan(1e-10);
    expect(report.predictions.js_distance!).toBeGreaterThan(0.05);
  });

  it('puts the worst findings first', () => {
    expect(report.findings[0]).toMatch(/^Out-of-domain answers: /);
    expect(report.findings.findIndex((f) => f.startsWith('melt_temp_c has shifted'))).toBeLessThan(report.findings.findIndex((f) => f.startsWith('Predicted classes')));
  });

  it('says so instead of giving p-values when the window holds too few rows', async () => {
    const small = await buildDriftReport(svc.store.drift, bundle(), { from: DAY_START, to: DAY_START + 20 * 60_000 }, { id: 'r2', createdAt: new Date() });
    expect(small.counts.scored).toBeLessThan(30);
    expect(small.verdict).toBe('insufficient data');
    expect(small.out_of_domain.p_value).toBeNull();
    expect(small.features.every((f) => f.ks.p_value === null && f.p_adjusted === null)).toBe(true);
    // a PSI over so few rows is given but not read as a band, and no finding is made of it
    expect(small.features.every((f) => f.psi !== null && f.band === null)).toBe(true);
    expect(small.findings.some((f) => f.includes('PSI'))).toBe(false);
    expect(small.findings[0]).toMatch(/^Only \d+ rows were scored in the window; at least 30 are needed/);
  });

  it('keeps memory bounded: above the cap the KS sample is a seeded uniform reservoir, and the report says so', async () => {
    const opts = { minRows: 30, sampleCap: 300, seed: 7 };
    const a = await buildDriftReport(svc.store.drift, bundle(), { from: DAY_START, to: DAY_END }, { id: 'r3', createdAt: new Date() }, opts);
    const b = await buildDriftReport(svc.store.drift, bundle(), { from: DAY_START, to: DAY_END }, { id: 'r3', createdAt: new Date(0) }, opts);
    expect(a.sample).toEqual({ rows: 300, cap: 300, reservoir: true, seed: 7 });
    expect(a.features.map((f) => f.ks.d)).toEqual(b.features.map((f) => f.ks.d));
    expect(a.findings.some((f) => f.includes('seeded uniform sample of 300 of the 1999 rows'))).toBe(true);
    // the PSI bins count every row, so they do not depend on the sample
    expect(a.features.map((f) => f.psi)).toEqual(report.features.map((f) => f.psi));
  });

  describe('findings on an otherwise quiet report', () => {
    // The real report with every sign of drift removed, then one sign put back at a time.
    const quiet = (): DriftReport => {
      const r = structuredClone(report);
      r.out_of_domain = { ...r.out_of_domain, p_value: 0.5, rate: r.out_of_domain.expected_rate };
      r.hourly = [];
      r.predictions.chi_square.p_value = 0.5;
      r.margin.ks.p_value = 0.5;
      r.sample.reservoir = false;
      for (const f of r.features) Object.assign(f, { band: 'stable', psi: 0.01, p_adjusted: 0.9, outside_count: 0 });
      return r;
    };

    it('reads a quiet report as stable', () => {
      const { verdict, findings } = writeFindings(quiet(), REPORT_DEFAULTS);
      expect(verdict).toBe('stable');
      expect(findings).toHaveLength(1);
      expect(findings[0]).toMatch(/^No drift found over 1999 rows/);
    });

    it('calls a feature shifted only when the KS test agrees with its PSI', () => {
      const r = quiet();
      Object.assign(r.features[0]!, { band: 'shifted', psi: 0.4, p_adjusted: 0.3 });
      const alone = writeFindings(r, REPORT_DEFAULTS);
      expect(alone.verdict).toBe('watch');
      expect(alone.findings[0]).toMatch(new RegExp(`^${r.features[0]!.name} has a PSI of 0.40, in the shifted band, but the KS test finds no evidence`));
      Object.assign(r.features[0]!, { p_adjusted: 0.001 });
      const both = writeFindings(r, REPORT_DEFAULTS);
      expect(both.verdict).toBe('shifted');
      expect(both.findings[0]).toMatch(new RegExp(`^${r.features[0]!.name} has shifted: PSI 0.40`));
    });

    it('raises watch for rows outside the training envelope and for lower margins', () => {
      const envelope = quiet();
      envelope.features[1]!.outside_count = 40;
      const e = writeFindings(envelope, REPORT_DEFAULTS);
      expect(e.verdict).toBe('watch');
      expect(e.findings[0]).toBe(`${envelope.features[1]!.name} was outside its training envelope in 40 of 1999 rows (2.00%).`);

      const margins = quiet();
      margins.margin.ks.p_value = 0.001;
      const m = writeFindings(margins, REPORT_DEFAULTS);
      expect(m.verdict).toBe('watch');
      expect(m.findings[0]).toMatch(/^Margins \(top-1 minus top-2 probability\) are/);
    });
  });
});
