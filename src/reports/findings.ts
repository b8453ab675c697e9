import { binomialUpperTail } from '../core/stats/proportion.js';
import type { ReportOptions } from './options.js';
import type { DriftReport } from '../contracts/drift-report.js';

type Verdict = DriftReport['verdict'];

/** An hour whose out-of-domain count has a binomial p below this is a fault hour. */
export const FAULT_HOUR_P = 1e-6;

/**
 * P(at least this many out-of-domain answers in the hour) at the expected rate, or null when the
 * hour is too thin (fewer than 10 answers) or clean to say anything. The findings and the hourly
 * chart both mark an hour by this one rule.
 */
export function faultHourP(h: { scored: number; out_of_domain: number }, expectedRate: number): number | null {
  if (h.scored < 10 || h.out_of_domain === 0) return null;
  return binomialUpperTail(h.out_of_domain, h.scored, Math.max(expectedRate, 1e-6));
}

/** Significance levels behind the words (common practice): below 0.001 a shift, below 0.01 watch. */
const SHIFT_P = 0.001;
const WATCH_P = 0.01;

export const formatP = (p: number): string => (p < 1e-15 ? '< 1e-15' : p < 0.001 ? `= ${p.toExponential(1)}` : `= ${p.toFixed(3)}`);
const pct = (v: number): string => `${(v * 100).toFixed(v < 0.1 ? 2 : 1)}%`;
const num = (v: number): string => (Math.abs(v) >= 100 ? v.toFixed(1) : Math.abs(v) >= 1 ? v.toFixed(2) : v.toPrecision(3));
const rank: Record<Verdict, number> = { stable: 0, watch: 1, shifted: 2, 'insufficient data': 3 };

/**
 * Plain sentences about a report, worst first, and the verdict they add up to. Every sentence
 * carries its numbers with their units or definitions, so that it can be read on its own.
 */
export function writeFindings(r: DriftReport, options: ReportOptions): { verdict: Verdict; findings: string[] } {
  const found: Array<{ severity: number; text: string }> = [];
  let verdict: Verdict = 'stable';
  const raise = (v: Verdict): void => {
    if (rank[v] > rank[verdict]) verdict = v;
  };
  const n = r.counts.scored;

  if (n < options.minRows) {
    raise('insufficient data');
    found.push({ severity: 100, text: `Only ${n} row${n === 1 ? ' was' : 's were'} scored in the window; at least ${options.minRows} are needed before tests mean anything, so this report gives counts and no p-values.` });
  }

  const o = r.out_of_domain;
  // The null rate: the top of the baseline's interval where the report has it.
  const expectedHigh = o.expected_ci_high ?? o.expected_rate;
  const baseline = o.expected_ci_high !== undefined && o.expected_rows !== undefined ? ` (at most ${pct(o.expected_ci_high)} at 95% on its ${o.expected_rows} calibration rows)` : '';
  if (o.rate !== null && o.p_value !== null && o.rate > expectedHigh && o.p_value < WATCH_P) {
    const shifted = o.p_value < SHIFT_P;
    raise(shifted ? 'shifted' : 'watch');
    found.push({
      severity: shifted ? 90 : 50,
      text: `Out-of-domain answers: ${pct(o.rate)} of ${n} (95% Wilson interval ${pct(o.ci_low ?? 0)} to ${pct(o.ci_high ?? 0)}), against ${pct(o.expected_rate)} expected from calibration${baseline}; exact binomial p ${formatP(o.p_value)}.`,
    });
  }

  for (const f of r.features) {
    const unit = f.unit ? ` ${f.unit}` : '';
    const means = f.mean !== null ? `mean ${num(f.mean)}${unit} against ${num(f.reference_mean)}${unit} in training` : '';
    const ks = f.ks.d !== null && f.p_adjusted !== null ? `KS D ${f.ks.d.toFixed(3)} (adjusted p ${formatP(f.p_adjusted)})` : '';
    const w = f.wasserstein !== null ? `Wasserstein ${f.wasserstein.toFixed(2)} training SD` : '';
    const detail = [means, ks, w].filter(Boolean).join('; ');
    const ksAgrees = f.p_adjusted !== null && f.p_adjusted < WATCH_P;
    if (f.band === 'shifted' && ksAgrees) {
      raise('shifted');
      found.push({ severity: 80 + Math.min(9, f.psi ?? 0), text: `${f.name} has shifted: PSI ${(f.psi ?? 0).toFixed(2)}; ${detail}.` });
    } else if (f.band === 'shifted') {
      // PSI alone on a modest window can come from a few heavy bins; without KS evidence it is a watch.
      raise('watch');
      found.push({ severity: 45 + Math.min(9, f.psi ?? 0), text: `${f.name} has a PSI of ${(f.psi ?? 0).toFixed(2)}, in the shifted band, but the KS test finds no evidence of a shift; worth watching: ${detail}.` });
    } else if (f.band === 'watch') {
      raise('watch');
      found.push({ severity: 40 + (f.psi ?? 0), text: `${f.name} is worth watching: PSI ${(f.psi ?? 0).toFixed(2)}; ${detail}.` });
    } else if (f.p_adjusted !== null && f.p_adjusted < SHIFT_P) {
      raise('watch');
      found.push({ severity: 35, text: `${f.name} differs from training although its PSI (${(f.psi ?? 0).toFixed(2)}) is in the stable band: ${detail}.` });
    }
    if (n > 0 && f.outside_count >= 5 && f.outside_count / n >= 0.01) {
      raise('watch');
      found.push({ severity: 70, text: `${f.name} was outside its training envelope in ${f.outside_count} of ${n} rows (${pct(f.outside_count / n)}).` });
    }
  }

  // Hours whose out-of-domain count the expected rate cannot explain (binomial p < 1e-6): the
  // signature of a fault with a start and an end, such as a failed sensor.
  for (const h of r.hourly) {
    const p = faultHourP(h, expectedHigh);
    if (p !== null && p < FAULT_HOUR_P) {
      raise('watch');
      const end = new Date(Date.parse(h.hour) + 3_600_000).toISOString().slice(11, 16);
      found.push({ severity: 70 + (10 * h.out_of_domain) / h.scored, text: `Between ${h.hour.slice(11, 16)} and ${end} UTC on ${h.hour.slice(0, 10)}, ${h.out_of_domain} of ${h.scored} answers were out of domain (binomial p ${formatP(p)} against the expected rate).` });
    }
  }

  const pr = r.predictions;
  if (pr.chi_square.p_value !== null && pr.chi_square.p_value < WATCH_P) {
    const moved = Object.keys(pr.fractions)
      .map((c) => ({ c, now: pr.fractions[c] ?? 0, then: pr.reference_fractions[c] ?? 0 }))
      .sort((a, z) => Math.abs(z.now - z.then) - Math.abs(a.now - a.then))
      .slice(0, 3)
      .map((x) => `${x.c} ${pct(x.now)} against ${pct(x.then)}`)
      .join(', ');
    const shifted = pr.chi_square.p_value < SHIFT_P;
    raise(shifted ? 'shifted' : 'watch');
    found.push({
      severity: shifted ? 60 : 30,
      text: `Predicted classes differ from the held-out answers at training: ${moved}; chi-square p ${formatP(pr.chi_square.p_value)}, Jensen-Shannon distance ${(pr.js_distance ?? 0).toFixed(3)}.`,
    });
  }

  const m = r.margin;
  if (m.ks.p_value !== null && m.mean !== null && m.ks.p_value < WATCH_P) {
    raise('watch');
    found.push({
      severity: 25,
      text: `Margins (top-1 minus top-2 probability) are ${m.mean < m.reference_mean ? 'lower' : 'higher'} than on the held-out answers at training: mean ${m.mean.toFixed(3)} against ${m.reference_mean.toFixed(3)}; KS p ${formatP(m.ks.p_value)}; ${pct(m.review_rate ?? 0)} of answers were marked for review.`,
    });
  }

  if (r.counts.rejected > 0) found.push({ severity: 10, text: `${r.counts.rejected} request${r.counts.rejected === 1 ? ' was' : 's were'} refused in the window (see the rejected_requests table).` });
  if (r.counts.other_versions > 0) found.push({ severity: 5, text: `${r.counts.other_versions} rows of other versions of ${r.model.name} fell in the window and are not in this report.` });
  if (r.sample.reservoir) found.push({ severity: 1, text: `KS and Wasserstein use a seeded uniform sample of ${r.sample.cap} of the ${n} rows (seed ${r.sample.seed}).` });

  if (verdict === 'stable' && n >= options.minRows) {
    found.push({
      severity: 0,
      text: `No drift found over ${n} rows: every feature's PSI is below 0.1, and the out-of-domain rate ${pct(o.rate ?? 0)} is consistent with the ${pct(o.expected_rate)} expected.`,
    });
  }
  return { verdict, findings: found.sort((a, z) => z.severity - a.severity).map((f) => f.text) };
}
