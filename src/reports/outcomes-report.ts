import { summariseOutcomes } from '../core/outcome-metrics.js';
import type { OutcomesReport } from '../contracts/outcomes-report.js';
import { forEachRow } from '../store/awaitable.js';
import type { LabelledRowView, OutcomesStore } from '../store/outcomes-store.js';
import { writeOutcomeFindings } from './outcome-findings.js';

/** What the report needs of the bundle: who it is and its classes in probability order. */
export interface ReportedModel {
  name: string;
  version: string;
  sha256: string;
  classes: string[];
}

/** Below this many labelled rows the findings say the figures are thin (common practice: 30). */
export const MIN_LABELLED = 30;

/**
 * The outcomes report of one bundle over [from, to): its labelled answers read once from the
 * store into plain arrays, and the statistics of core/outcome-metrics.ts over them. Memory grows
 * with the labelled rows (a few dozen bytes each, plus the probabilities).
 */
export async function buildOutcomesReport(
  store: Pick<OutcomesStore, 'countScored' | 'labelledRows'>,
  model: ReportedModel,
  window: { from: number; to: number },
  createdAt: Date,
): Promise<OutcomesReport> {
  const K = model.classes.length;
  const index = new Map(model.classes.map((c, k) => [c, k]));
  const actual: number[] = [];
  const predicted: number[] = [];
  const probabilities: number[] = [];
  const margin: number[] = [];
  const inDomain: boolean[] = [];
  const review: boolean[] = [];
  await forEachRow(store.labelledRows(model.sha256, window.from, window.to), (row: LabelledRowView) => {
    const a = index.get(row.actual);
    const p = index.get(row.label);
    // Outcomes are checked against the classes when recorded; a row that does not fit is skipped.
    if (a === undefined || p === undefined || row.probabilities.length !== K * 8) return;
    actual.push(a);
    predicted.push(p);
    for (let k = 0; k < K; k++) probabilities.push(row.probabilities.readDoubleLE(k * 8));
    margin.push(row.margin);
    inDomain.push(row.in_domain === 1);
    review.push(row.review === 1);
  });
  const scored = await store.countScored(model.sha256, window.from, window.to);
  const m = summariseOutcomes({ classes: K, actual, predicted, probabilities, margin, inDomain, review });
  const report: OutcomesReport = {
    model: { name: model.name, version: model.version, sha256: model.sha256 },
    window: { from: new Date(window.from).toISOString(), to: new Date(window.to).toISOString() },
    created_at: createdAt.toISOString(),
    scored,
    labelled: m.labelled,
    labelled_rate: scored > 0 ? m.labelled / scored : null,
    accuracy: m.accuracy,
    classes: m.classes.map((c, k) => ({ label: model.classes[k] as string, ...c })),
    confusion: { labels: model.classes, counts: m.confusion },
    log_loss: m.log_loss,
    brier: m.brier,
    ece: m.ece,
    by_domain: m.by_domain,
    by_margin: m.by_margin,
    review: m.review,
    not_review: m.not_review,
    findings: [],
  };
  report.findings = writeOutcomeFindings(report, MIN_LABELLED);
  return report;
}

/** The outcomes report of a model by name: its bundle loaded last; null when the log holds no bundle of that name. */
export async function outcomesReportFor(store: Pick<OutcomesStore, 'countScored' | 'labelledRows' | 'latestModel'>, name: string, window: { from: number; to: number }, now = new Date()): Promise<OutcomesReport | null> {
  const model = await store.latestModel(name);
  return model ? buildOutcomesReport(store, model, window, now) : null;
}
