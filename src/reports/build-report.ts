import { binIndex, meanAndStd } from '../core/describe.js';
import { type Rng, createRng } from '../core/rng.js';
import { benjaminiHochberg, chiSquareGoodnessOfFit, jensenShannonDistance, psi, psiBand, wasserstein1 } from '../core/stats/compare.js';
import { ksTest } from '../core/stats/ks.js';
import { binomialUpperTail, wilsonInterval } from '../core/stats/proportion.js';
import type { LoadedBundle } from '../bundle/verify.js';
import { falseAlarmBaseline } from '../bundle/baseline.js';
import type { DriftStore, ScoredRowView } from '../store/drift-store.js';
import { writeFindings } from './findings.js';
import { REPORT_DEFAULTS, type ReportOptions } from './options.js';
import type { DriftReport, FeatureDrift } from '../contracts/drift-report.js';

const HOUR = 3_600_000;

/** Keeps a uniform sample of at most cap items from a stream of unknown length (Vitter 1985, Algorithm R). */
class Reservoir {
  readonly values: Float64Array;
  seen = 0;
  constructor(
    readonly cap: number,
    readonly width: number,
    private readonly rng: Rng,
  ) {
    this.values = new Float64Array(cap * width);
  }
  /** The slot to write the next item into, or -1 to drop it. */
  slot(): number {
    const i = this.seen++;
    if (i < this.cap) return i;
    const j = Math.floor(this.rng.next() * (i + 1));
    return j < this.cap ? j : -1;
  }
  get size(): number {
    return Math.min(this.seen, this.cap);
  }
}

function column(values: Float64Array, rows: number, width: number, j: number): Float64Array {
  const out = new Float64Array(rows);
  for (let r = 0; r < rows; r++) out[r] = values[r * width + j] as number;
  return out.sort();
}

/**
 * Builds a drift report for one bundle over [from, to) by streaming its logged rows once: memory
 * stays bounded by the reservoir whatever the window. Each feature is compared with the bundle's
 * training reference (PSI on its decile bins, KS and Wasserstein-1 against its reference sample,
 * Benjamini-Hochberg across features); predictions with the held-out answers'; the
 * out-of-domain rate with the false-alarm rate measured when the flag was calibrated.
 */
export async function buildDriftReport(
  store: Pick<DriftStore, 'scoredRows' | 'countOtherVersions' | 'countRejected'>,
  bundle: LoadedBundle,
  window: { from: number; to: number },
  meta: { id: string; createdAt: Date },
  options: ReportOptions = REPORT_DEFAULTS,
): Promise<DriftReport> {
  const b = bundle.file;
  const d = b.features.length;
  const K = b.classes.length;
  const ref = b.reference;
  const env = b.domain.envelope;
  const classIndex = new Map(b.classes.map((c, k) => [c, k]));
  const binCounts = ref.features.map((f) => new Float64Array(f.bin_edges.length + 1));
  const sums = new Float64Array(d);
  const outside = new Float64Array(d);
  const labelCounts = new Float64Array(K);
  const hourly = new Map<number, { scored: number; ood: number }>();
  const rng = createRng(options.seed);
  const sample = new Reservoir(options.sampleCap, d, rng);
  const margins = new Reservoir(options.sampleCap, 1, rng);
  const x = new Float64Array(d);
  let scored = 0;
  let ood = 0;
  let review = 0;
  let marginSum = 0;

  const add = (row: ScoredRowView): void => {
    for (let j = 0; j < d; j++) x[j] = row.features.readDoubleLE(j * 8);
    scored++;
    for (let j = 0; j < d; j++) {
      const v = x[j] as number;
      sums[j] = (sums[j] as number) + v;
      const counts = binCounts[j] as Float64Array;
      const bin = binIndex((ref.features[j] as { bin_edges: number[] }).bin_edges, v);
      counts[bin] = (counts[bin] as number) + 1;
      if (!(v >= (env.low[j] as number) && v <= (env.high[j] as number))) outside[j] = (outside[j] as number) + 1;
    }
    const s = sample.slot();
    if (s >= 0) sample.values.set(x, s * d);
    const k = classIndex.get(row.label);
    if (k !== undefined) labelCounts[k] = (labelCounts[k] as number) + 1;
    if (row.in_domain === 0) ood++;
    if (row.review === 1) review++;
    marginSum += row.margin;
    const m = margins.slot();
    if (m >= 0) margins.values[m] = row.margin;
    const hour = Math.floor(row.received_at / HOUR);
    const h = hourly.get(hour) ?? { scored: 0, ood: 0 };
    h.scored++;
    if (row.in_domain === 0) h.ood++;
    hourly.set(hour, h);
  };
  const source = store.scoredRows(b.sha256, window.from, window.to);
  // SQLite's rows come synchronously, one at a time; a server's in pages.
  if (Symbol.asyncIterator in source) {
    for await (const page of source) for (const row of page) add(row);
  } else {
    for (const row of source) add(row);
  }
  const rejected = await store.countRejected(b.name, window.from, window.to);
  const otherVersions = await store.countOtherVersions(b.name, b.sha256, window.from, window.to);

  const enough = scored >= options.minRows;
  const rows = sample.size;
  const features: FeatureDrift[] = b.features.map((f, j) => {
    const r = ref.features[j] as (typeof ref.features)[number];
    const counts = binCounts[j] as Float64Array;
    const windowFractions = Array.from(counts, (c) => (scored > 0 ? c / scored : 0));
    const win = column(sample.values, rows, d, j);
    const refSample = Float64Array.from(ref.sample.values[j] as number[]).sort();
    const ks = enough && refSample.length > 0 ? ksTest(win, refSample) : null;
    const p = scored > 0 ? psi(windowFractions, r.bin_fractions) : null;
    return {
      name: f.name,
      unit: f.unit,
      n: scored,
      mean: scored > 0 ? (sums[j] as number) / scored : null,
      reference_mean: r.mean,
      psi: p,
      // Below min_rows a PSI is mostly sampling noise: it is given, but not read as a band.
      band: p === null || !enough ? null : psiBand(p),
      ks: { d: ks?.d ?? null, p_value: ks?.p_value ?? null, method: ks?.method ?? null },
      p_adjusted: null,
      wasserstein: scored > 0 && r.std > 0 && refSample.length > 0 ? wasserstein1(win, refSample) / r.std : null,
      outside_count: outside[j] as number,
      bins: { edges: r.bin_edges, reference: r.bin_fractions, window: windowFractions },
    };
  });
  if (enough) {
    const adjusted = benjaminiHochberg(features.map((f) => f.ks.p_value ?? 1));
    features.forEach((f, j) => (f.p_adjusted = adjusted[j] as number));
  }

  const baseline = falseAlarmBaseline(b);
  const ci = wilsonInterval(ood, scored);
  const fractions = Object.fromEntries(b.classes.map((c, k) => [c, scored > 0 ? (labelCounts[k] as number) / scored : 0]));
  const referenceFractions = ref.validation.predicted_fractions;
  const chi = enough ? chiSquareGoodnessOfFit(labelCounts, b.classes.map((c) => referenceFractions[c] ?? 0)) : null;
  const marginSample = Float64Array.from(margins.values.subarray(0, margins.size)).sort();
  const refMargins = Float64Array.from(ref.validation.margins).sort();
  const marginKs = enough && refMargins.length > 0 ? ksTest(marginSample, refMargins) : null;

  const hours = [...hourly.keys()].sort((a, z) => a - z);
  const report: DriftReport = {
    id: meta.id,
    model: { name: b.name, version: b.version, sha256: b.sha256 },
    window: { from: new Date(window.from).toISOString(), to: new Date(window.to).toISOString() },
    created_at: meta.createdAt.toISOString(),
    verdict: 'stable',
    counts: {
      scored,
      rejected,
      out_of_domain: ood,
      other_versions: otherVersions,
    },
    out_of_domain: {
      rate: scored > 0 ? ood / scored : null,
      ci_low: scored > 0 ? ci.low : null,
      ci_high: scored > 0 ? ci.high : null,
      expected_rate: baseline.rate,
      expected_ci_low: baseline.low,
      expected_ci_high: baseline.high,
      expected_rows: baseline.rows,
      // Against the top of the baseline's interval: a rate measured on a few hundred rows is not
      // known better than that, and its sampling error must not read as drift.
      p_value: enough ? binomialUpperTail(ood, scored, baseline.high) : null,
    },
    features,
    predictions: {
      fractions,
      reference_fractions: referenceFractions,
      chi_square: { statistic: chi && Number.isFinite(chi.statistic) ? chi.statistic : null, df: chi?.df ?? K - 1, p_value: chi?.p_value ?? null },
      js_distance: scored > 0 ? jensenShannonDistance(b.classes.map((c) => fractions[c] ?? 0), b.classes.map((c) => referenceFractions[c] ?? 0)) : null,
    },
    margin: {
      mean: scored > 0 ? marginSum / scored : null,
      reference_mean: meanAndStd(ref.validation.margins).mean,
      ks: { d: marginKs?.d ?? null, p_value: marginKs?.p_value ?? null },
      review_rate: scored > 0 ? review / scored : null,
    },
    hourly: hours.map((h) => ({ hour: new Date(h * HOUR).toISOString(), scored: hourly.get(h)?.scored ?? 0, out_of_domain: hourly.get(h)?.ood ?? 0 })),
    sample: { rows, cap: options.sampleCap, reservoir: scored > options.sampleCap, seed: options.seed },
    findings: [],
  };
  const { verdict, findings } = writeFindings(report, options);
  report.verdict = verdict;
  report.findings = findings;
  return report;
}
