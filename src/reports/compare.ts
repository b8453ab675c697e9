import { ScoreOverflowError, createScorer, modelRef } from '../bundle/scorer.js';
import type { LoadedBundle } from '../bundle/verify.js';
import { mcnemarExact } from '../core/stats/exact-tests.js';
import { wilsonInterval } from '../core/stats/proportion.js';
import type { CompareReport } from '../contracts/compare-report.js';
import type { ModelRef } from '../contracts/model-ref.js';
import { type Awaitable, forEachRow } from '../store/awaitable.js';
import type { ModelRecord } from '../store/models-table.js';
import type { LoggedVectorView, OutcomesStore } from '../store/outcomes-store.js';
import { formatP } from './findings.js';

/** Rows rescored together: one forward pass of every member per batch. */
const BATCH = 512;

/** The candidate does not take the features the model's answers were logged with. */
export class IncompatibleBundleError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'IncompatibleBundleError';
  }
}

const pct = (v: number): string => `${(v * 100).toFixed(1)}%`;

function accuracy(right: number, n: number): CompareReport['accuracy']['current'] {
  const ci = wilsonInterval(right, n);
  return { value: n > 0 ? right / n : null, ci_low: n > 0 ? ci.low : null, ci_high: n > 0 ? ci.high : null };
}

/**
 * Rescores a model's logged vectors in [from, to) with a candidate bundle, offline: how often it
 * agrees with the logged answers, the table of logged against candidate labels, each one's
 * in-domain share, and on the rows with an outcome both accuracies and McNemar's exact test on
 * the rows where exactly one of them was right (McNemar 1947). Vectors are matched to the
 * candidate's features by name; the logged answers stand for the bundles that gave them.
 */
export async function compareCandidate(
  store: Pick<OutcomesStore, 'loggedVectors' | 'describeModel'>,
  model: string,
  candidate: LoadedBundle,
  window: { from: number; to: number },
  createdAt = new Date(),
): Promise<CompareReport> {
  const scorer = createScorer(candidate);
  const cFile = candidate.file;
  const d = cFile.features.length;
  const cLabels = [...cFile.classes];
  const current: ModelRef[] = [];
  const currentLabels: string[] = [];
  // Per logged bundle: where each candidate feature sits in its vector (null: it lacks one).
  const plans = new Map<string, number[] | null>();
  const learn = (sha256: string, m: ModelRecord | null): void => {
    let plan: number[] | null = null;
    if (m) {
      current.push({ name: m.name, version: m.version, sha256: m.sha256 });
      for (const c of m.classes) if (!currentLabels.includes(c)) currentLabels.push(c);
      const at = new Map(m.features.map((f, j) => [f.name, j]));
      const idx = cFile.features.map((f) => at.get(f.name) ?? -1);
      plan = idx.every((j) => j >= 0) ? idx : null;
    }
    plans.set(sha256, plan);
  };

  const counts = new Map<string, number>();
  let rows = 0;
  let skipped = 0;
  let agree = 0;
  let inCurrent = 0;
  let inCandidate = 0;
  let labelled = 0;
  let rightCurrent = 0;
  let rightCandidate = 0;
  let currentOnly = 0;
  let candidateOnly = 0;
  let batch: Array<{ label: string; inDomain: boolean; actual: string | null }> = [];
  const x = new Float64Array(BATCH * d);

  const tally = (logged: { label: string; inDomain: boolean; actual: string | null }, answered: { label: string; in_domain: boolean }): void => {
    rows++;
    if (logged.label === answered.label) agree++;
    if (logged.inDomain) inCurrent++;
    if (answered.in_domain) inCandidate++;
    const key = `${logged.label}\u0000${answered.label}`;
    counts.set(key, (counts.get(key) ?? 0) + 1);
    if (logged.actual !== null) {
      labelled++;
      const a = logged.label === logged.actual;
      const b = answered.label === logged.actual;
      if (a) rightCurrent++;
      if (b) rightCandidate++;
      if (a && !b) currentOnly++;
      if (b && !a) candidateOnly++;
    }
  };
  const flush = (): void => {
    if (batch.length === 0) return;
    try {
      const answers = scorer.scoreRows(x, batch.length);
      batch.forEach((b, i) => tally(b, { label: answers[i]?.label as string, in_domain: answers[i]?.domain.in_domain === true }));
    } catch (err) {
      if (!(err instanceof ScoreOverflowError)) throw err;
      // One row the candidate cannot score: the others of the batch, one by one.
      batch.forEach((b, i) => {
        try {
          const [a] = scorer.scoreRows(x.subarray(i * d, (i + 1) * d), 1);
          if (a) tally(b, { label: a.label, in_domain: a.domain.in_domain });
        } catch (e) {
          if (!(e instanceof ScoreOverflowError)) throw e;
          skipped++;
        }
      });
    }
    batch = [];
  };

  const take = (row: LoggedVectorView): void => {
    const plan = plans.get(row.model_sha256) ?? null;
    if (!plan) {
      skipped++;
      return;
    }
    const at = batch.length * d;
    for (let j = 0; j < d; j++) x[at + j] = row.features.readDoubleLE((plan[j] as number) * 8);
    batch.push({ label: row.label, inDomain: row.in_domain === 1, actual: row.actual });
    if (batch.length === BATCH) flush();
  };
  // A bundle met for the first time is looked up: at once on SQLite, whose rows come from an
  // open iterator; awaited on a server, between two pages' rows.
  await forEachRow(store.loggedVectors(model, window.from, window.to, false), (row): Awaitable<void> => {
    if (plans.has(row.model_sha256)) return take(row);
    const m = store.describeModel(row.model_sha256);
    if (m instanceof Promise) {
      return m.then((r) => {
        learn(row.model_sha256, r);
        take(row);
      });
    }
    learn(row.model_sha256, m);
    take(row);
  });
  flush();
  if (rows === 0 && skipped > 0) {
    throw new IncompatibleBundleError(`the candidate takes features (${cFile.features.map((f) => f.name).join(', ')}) that the logged answers of ${model} in the window do not all have`);
  }

  const table = currentLabels.map((a) => cLabels.map((b) => counts.get(`${a}\u0000${b}`) ?? 0));
  const report: CompareReport = {
    model,
    current,
    candidate: modelRef(candidate),
    window: { from: new Date(window.from).toISOString(), to: new Date(window.to).toISOString() },
    created_at: createdAt.toISOString(),
    rows,
    skipped,
    agreement: { rows: agree, rate: rows > 0 ? agree / rows : null },
    labels: { current: currentLabels, candidate: cLabels, counts: table },
    in_domain: { current: rows > 0 ? inCurrent / rows : null, candidate: rows > 0 ? inCandidate / rows : null },
    labelled,
    accuracy: { current: accuracy(rightCurrent, labelled), candidate: accuracy(rightCandidate, labelled) },
    mcnemar: { current_only: currentOnly, candidate_only: candidateOnly, p_value: labelled > 0 ? mcnemarExact(currentOnly, candidateOnly) : null },
    findings: [],
  };
  report.findings = compareFindings(report);
  return report;
}

/** Plain sentences about a comparison, the verdict on accuracy first. */
function compareFindings(r: CompareReport): string[] {
  const out: string[] = [];
  if (r.rows === 0) return [`No logged answers of ${r.model} in the window to rescore.`];
  const m = r.mcnemar;
  const cur = r.accuracy.current;
  const cand = r.accuracy.candidate;
  if (r.labelled === 0) {
    out.push(`None of the ${r.rows} rescored answers has an outcome, so which bundle is more often right cannot be said; record outcomes (POST /v1/outcomes) first.`);
  } else {
    const both = `the candidate was right in ${pct(cand.value ?? 0)} of the ${r.labelled} answers with an outcome, the logged answers in ${pct(cur.value ?? 0)}; they differ on ${m.current_only + m.candidate_only} (candidate alone right ${m.candidate_only}, logged alone right ${m.current_only}), McNemar exact p ${formatP(m.p_value ?? 1)}`;
    if ((m.p_value ?? 1) < 0.05) out.push(`${m.candidate_only > m.current_only ? 'The candidate does better' : 'The candidate does worse'}: ${both}.`);
    else out.push(`No clear difference in accuracy: ${both}.`);
    if (r.labelled < 30) out.push(`Only ${r.labelled} answers have an outcome; with fewer than 30 the comparison is rough.`);
  }
  out.push(`The candidate gives the logged label on ${pct(r.agreement.rate ?? 0)} of ${r.rows} answers.`);
  out.push(`It holds ${pct(r.in_domain.candidate ?? 0)} of them in its training domain, against ${pct(r.in_domain.current ?? 0)} for the logged answers.`);
  if (r.skipped > 0) out.push(`${r.skipped} logged answers were left out: their bundle lacks a feature the candidate takes, or the candidate overflows on them.`);
  return out;
}
