import { auroc } from '../core/domain/auroc.js';
import { calibrateJoint, conformalThreshold, leaveOneOutPasses } from '../core/domain/calibrate.js';
import { type BatchView, DETECTORS, type DetectorName, type DomainModels, type MemberModels, type MemberOutput, scoreDomain } from '../core/domain/detectors.js';
import { envelopeFromRange, featuresOutside, quantileRange, rangeExceedance } from '../core/domain/envelope.js';
import { fitClassConditional, fitMahalanobis } from '../core/domain/mahalanobis.js';
import { type ProbeSet, makeProbes } from '../core/domain/probes.js';
import { disagreementScores, memberForRow } from '../core/ensemble.js';
import { type Network, forward } from '../core/network.js';
import type { Rng } from '../core/rng.js';
import { topTwo } from '../core/softmax.js';
import { type Standardizer, standardize } from '../core/standardize.js';
import { clopperPearsonInterval } from '../core/stats/proportion.js';
import { packLower } from './domain-codec.js';
import { ensembleAnswer } from './evaluate.js';
import type { Domain, Evaluation } from './schema.js';

/** Detectors that may be switched off; the envelope always runs, since it names the features. */
export const OPTIONAL_DETECTORS = DETECTORS.filter((d) => d !== 'envelope');

export const DOMAIN_DEFAULTS = { tolerance: 0.1, reviewMargin: 0.2, inDomainRate: 0.99, probeRows: 500 } as const;

/** A detector whose AUROC stays below this in every probe family separates nothing and leaves the vote. */
export const MIN_AUROC = 0.6;

/** The widest envelope calibration may choose (unless a wider tolerance is asked for): a whole range beyond each end of the quantile range. */
export const MAX_TOLERANCE = 1;

/** Confidence of the interval stored around the false-alarm rate. */
const CI_CONFIDENCE = 0.95;

export interface DomainFitInput {
  members: readonly Network[];
  preprocess: Standardizer;
  temperature: number;
  classes: number;
  /** Per member, the rows (raw units, class indices) its network was trained on: its detectors are fitted there. */
  memberRows: ReadonlyArray<{ x: Float64Array; labels: Int32Array; rows: number }>;
  /** The rows the served envelope is taken from: every row a member trained on. */
  envelopeRows: { x: Float64Array; rows: number };
  /**
   * In-domain rows (raw units) the flag is calibrated on. memberOf[r] is the member that never saw
   * row r, whose detectors and envelope check it; -1 where no member saw it (rows given with
   * --calibrate-on): the row is then checked as a new vector is, by the member its hash picks,
   * against the served envelope.
   */
  calibration: {
    x: Float64Array;
    rows: number;
    memberOf: Int32Array;
    source: Domain['held_out']['source'];
    /**
     * The rows' logits from networks that never saw them, answering together (one rows x classes
     * array per network): what the disagreement and the baseline are calibrated on. Absent, the
     * members answer (right for rows no member saw).
     */
    answers?: readonly Float64Array[];
  };
  /** Detectors besides the envelope that may vote. */
  detectors: readonly DetectorName[];
  /** Keep in the vote a detector that separates no probe family. */
  keepWeak: boolean;
  targetRate: number;
  tolerance: number;
  reviewMargin: number;
  probeRows: number;
}

const round6 = (v: number): number => Number(v.toFixed(6));
const share = (b: ArrayLike<boolean>): number => (b.length === 0 ? 0 : round6(Array.from(b).filter(Boolean).length / b.length));

interface ScoredRows {
  view: BatchView;
  scores: Partial<Record<DetectorName, Float64Array>>;
  /** Excess over the quantile range, in range units: the envelope's continuous score. */
  exceedance: Float64Array;
  /** 1 - the largest probability: the baseline every paper on this compares against. */
  maxProbability: Float64Array;
}

/**
 * Fits the detectors of every member on the rows its network trained on, scores the calibration
 * rows as new rows would be scored (each by a member that never saw it), drops the detectors that
 * separate none of the generated out-of-domain probes, calibrates the envelope and the remaining
 * detectors jointly so that the flag passes the target share of the calibration rows
 * (calibrateJoint), and measures that share leave-one-out, with its Clopper–Pearson interval.
 */
export function fitDomain(input: DomainFitInput, rng: Rng): Domain {
  const { members, preprocess, temperature, classes, calibration: cal } = input;
  const d = preprocess.mean.length;
  const M = members.length;
  const leftOut: Domain['left_out'] = [];
  const width = (members[0]?.layers.length ?? 0) >= 2 ? (members[0]?.layers.at(-1)?.inputs ?? 0) : 0;
  let candidates: DetectorName[] = OPTIONAL_DETECTORS.filter((n) => input.detectors.includes(n));
  const answering = cal.answers?.length ?? M;
  if (candidates.includes('disagreement') && (M < 2 || answering < 2)) {
    leftOut.push({ detector: 'disagreement', reason: M < 2 ? 'needs two members or more (train with --folds 3 or more)' : 'needs two networks that never saw a row to calibrate it (train with --folds 3 or more)' });
  }
  if (candidates.includes('feature_mahalanobis') && width === 0) leftOut.push({ detector: 'feature_mahalanobis', reason: 'the network has no hidden layer' });
  candidates = candidates.filter((n) => !leftOut.some((l) => l.detector === n));

  const servingRange = quantileRange(input.envelopeRows.x, input.envelopeRows.rows, d);
  const memberRanges = input.memberRows.map((r) => quantileRange(r.x, r.rows, d));
  const memberModels: MemberModels[] = members.map((net, m) => {
    const own = input.memberRows[m] as DomainFitInput['memberRows'][number];
    const z = standardize(preprocess, own.x, own.rows);
    const fitted: MemberModels = {};
    if (candidates.includes('input_mahalanobis')) fitted.input_mahalanobis = fitMahalanobis(z, own.rows, d);
    if (candidates.includes('feature_mahalanobis')) fitted.feature_mahalanobis = fitClassConditional(Float64Array.from(forward(net, z, own.rows).hidden), own.labels, own.rows, width, classes);
    return fitted;
  });
  const models: DomainModels = {
    envelope: envelopeFromRange(servingRange, input.tolerance),
    members: memberModels,
    ...(candidates.includes('energy') ? { energy: { temperature } } : {}),
    ...(candidates.includes('disagreement') ? { disagreement: true as const } : {}),
  };

  // Rows are scored as the scorer scores them: every member's forward pass, the mean of their
  // probabilities, and the detectors of the member that checks the row.
  const scoreRows = (x: Float64Array, rows: number, memberOf: (r: number) => number, range: (r: number) => { low: Float64Array; high: Float64Array }, answers?: readonly Float64Array[]): ScoredRows => {
    const z = standardize(preprocess, x, rows);
    const passes = members.map((net) => forward(net, z, rows));
    const outputs: MemberOutput[] = passes;
    const memberOfRow = Int32Array.from({ length: rows }, (_, r) => memberOf(r));
    // The networks that answer together: the members, or those that never saw the rows.
    const answer = ensembleAnswer(answers ?? passes.map((o) => o.logits), rows, classes, temperature);
    const view: BatchView = { rows, raw: x, standardized: z, members: outputs, memberOfRow, classes };
    const { disagreement: _all, ...perMember } = models;
    const scores = scoreDomain(perMember, view).scores;
    if (models.disagreement) scores.disagreement = disagreementScores(answer.members, answer.mean, rows, classes);
    return {
      view,
      scores,
      exceedance: Float64Array.from({ length: rows }, (_, r) => rangeExceedance(range(r), x, r * d)),
      maxProbability: Float64Array.from({ length: rows }, (_, r) => 1 - topTwo(answer.mean, r * classes, classes).top),
    };
  };
  const hashed = (x: Float64Array) => (r: number): number => memberForRow(x, r * d, d, M);
  const calMember = (r: number): number => ((cal.memberOf[r] as number) >= 0 ? (cal.memberOf[r] as number) : memberForRow(cal.x, r * d, d, M));
  const held = scoreRows(cal.x, cal.rows, calMember, (r) => ((cal.memberOf[r] as number) >= 0 ? (memberRanges[cal.memberOf[r] as number] as typeof servingRange) : servingRange), cal.answers);
  // Rows within the asked-for tolerance all pass the envelope: they tie at that floor and spend no budget.
  const floor = (e: Float64Array): Float64Array => e.map((v) => Math.max(v, input.tolerance));

  const probes = makeProbes(
    {
      heldOut: cal.x,
      heldOutRows: cal.rows,
      dim: d,
      rangeLow: servingRange.low,
      rangeHigh: servingRange.high,
      envelopeLow: models.envelope.low,
      envelopeHigh: models.envelope.high,
      rowsPerProbe: input.probeRows,
    },
    rng,
  );
  const probeScores = probes.map((p) => scoreRows(p.x, p.rows, hashed(p.x), () => servingRange));
  const aurocOf = (neg: ArrayLike<number>, pos: ArrayLike<number>): number | null => {
    const all = [...Array.from(neg), ...Array.from(pos)];
    return all.every((v) => v === all[0]) ? null : round6(auroc(neg, pos));
  };
  const continuous = (s: ScoredRows, n: DetectorName | 'max_probability'): Float64Array =>
    n === 'envelope' ? s.exceedance : n === 'max_probability' ? s.maxProbability : (s.scores[n] as Float64Array);
  const aurocs = (n: DetectorName | 'max_probability'): Array<number | null> => probeScores.map((s) => aurocOf(continuous(held, n), continuous(s, n)));

  // A detector that separates none of the probe families only spends the false-alarm budget.
  const voting = candidates.filter((n) => {
    const a = aurocs(n);
    if (input.keepWeak || a.some((v) => v !== null && v >= MIN_AUROC)) return true;
    leftOut.push({ detector: n, reason: `separates none of the probe families: AUROC ${a.map((v) => (v === null ? '-' : v.toFixed(2))).join(', ')}, all below ${MIN_AUROC} (--keep-weak keeps it)` });
    return false;
  });

  const joint = calibrateJoint([floor(held.exceedance), ...voting.map((n) => held.scores[n] as Float64Array)], cal.rows, input.targetRate);
  // Calibration widens the envelope at most to MAX_TOLERANCE (or to the tolerance asked for, if
  // wider). Where that cap binds, the rows beyond it fail the served envelope whatever the ranks
  // said, and the pass rate measured below counts them as failed.
  const cap = Math.max(MAX_TOLERANCE, input.tolerance);
  const tolerance = Math.min(cap, cal.rows === 0 ? input.tolerance : Math.max(input.tolerance, joint.thresholds[0] as number));
  models.envelope = envelopeFromRange(servingRange, tolerance);
  const thresholds = Object.fromEntries(voting.map((n, i) => [n, joint.thresholds[i + 1] as number])) as Record<DetectorName, number>;
  const passes = joint.looPasses.map((ok, r) => ok && (held.exceedance[r] as number) <= tolerance);
  const passed = passes.filter(Boolean).length;
  const ci = clopperPearsonInterval(cal.rows - passed, cal.rows, CI_CONFIDENCE);
  const inDomainRate = cal.rows === 0 ? 0 : round6(passed / cal.rows);

  // The evaluation: each voting detector at the flag's thresholds; the ones left out, and the
  // maximum softmax probability, each calibrated alone to the target, for comparison.
  const alone = (n: DetectorName | 'max_probability'): number => conformalThreshold(continuous(held, n), input.targetRate);
  const compared = [...leftOut.filter((l) => candidates.includes(l.detector as DetectorName)).map((l) => l.detector as DetectorName), 'max_probability' as const];
  const limits = new Map<string, number>([...voting.map((n) => [n, thresholds[n]] as const), ...compared.map((n) => [n, alone(n)] as const)]);
  const envelopePasses = (s: ScoredRows, rows: number, own: boolean): boolean[] =>
    Array.from({ length: rows }, (_, r) => (own ? (s.exceedance[r] as number) <= tolerance : featuresOutside(models.envelope, s.view.raw, r * d).length === 0));
  const passesOf = (s: ScoredRows, rows: number, own: boolean): Record<string, boolean[]> => {
    const out: Record<string, boolean[]> = { envelope: envelopePasses(s, rows, own) };
    for (const [n, t] of limits) out[n] = Array.from(continuous(s, n as DetectorName), (v) => v <= t);
    out.composite = Array.from({ length: rows }, (_, r) => ['envelope', ...voting].every((n) => (out[n] as boolean[])[r]));
    return out;
  };
  const heldPasses = passesOf(held, cal.rows, true);
  heldPasses.composite = passes;
  for (const n of compared) heldPasses[n] = leaveOneOutPasses(continuous(held, n), input.targetRate);
  const order = ['envelope', ...voting, 'composite', ...compared];
  const evaluation: Evaluation = {
    held_out_rows: cal.rows,
    pass_rate: Object.fromEntries(order.map((n) => [n, share(heldPasses[n] as boolean[])])),
    probes: probes.map((p: ProbeSet, i) => {
      const s = probeScores[i] as ScoredRows;
      const f = passesOf(s, p.rows, false);
      return {
        name: p.name,
        description: p.description,
        rows: p.rows,
        detection_rate: Object.fromEntries(order.map((n) => [n, share((f[n] as boolean[]).map((v) => !v))])),
        auroc: Object.fromEntries(order.filter((n) => n !== 'composite').map((n) => [n, aurocOf(continuous(held, n as DetectorName), continuous(s, n as DetectorName))])),
      };
    }),
  };

  const gaussians = voting.includes('input_mahalanobis')
    ? { input_mahalanobis: { threshold: thresholds.input_mahalanobis, members: memberModels.map((m) => ({ mean: Array.from(m.input_mahalanobis?.mean ?? []), cholesky: packLower(m.input_mahalanobis?.cholesky ?? new Float64Array(0), d), shrinkage: m.input_mahalanobis?.shrinkage ?? 0 })) } }
    : {};
  const features = voting.includes('feature_mahalanobis')
    ? {
        feature_mahalanobis: {
          threshold: thresholds.feature_mahalanobis,
          members: memberModels.map((m) => {
            const f = m.feature_mahalanobis;
            const dim = f?.dim ?? 0;
            return {
              class_means: Array.from({ length: classes }, (_, k) => Array.from(f?.means.subarray(k * dim, (k + 1) * dim) ?? [])),
              cholesky: packLower(f?.cholesky ?? new Float64Array(0), dim),
              shrinkage: f?.shrinkage ?? 0,
            };
          }),
        },
      }
    : {};
  return {
    review_margin: input.reviewMargin,
    target_in_domain_rate: input.targetRate,
    held_out: {
      source: cal.source,
      rows: cal.rows,
      level: round6(joint.level),
      in_domain_rate: inDomainRate,
      false_alarm_rate: round6(1 - inDomainRate),
      false_alarm_ci: { low: round6(ci.low), high: round6(ci.high), confidence: CI_CONFIDENCE },
    },
    envelope: { ...models.envelope, range: (({ low, high }) => ({ low, high }))(envelopeFromRange(servingRange, 0)) },
    ...gaussians,
    ...features,
    ...(voting.includes('energy') ? { energy: { threshold: thresholds.energy } } : {}),
    ...(voting.includes('disagreement') ? { disagreement: { threshold: thresholds.disagreement } } : {}),
    left_out: leftOut,
    evaluation,
  };
}
