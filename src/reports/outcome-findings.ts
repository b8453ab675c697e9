import type { OutcomesReport } from '../contracts/outcomes-report.js';
import { formatP } from './findings.js';

const pct = (v: number): string => `${(v * 100).toFixed(1)}%`;
const of = (right: number, rows: number): string => `${right} of ${rows}`;

/** Levels behind the words (common practice): below 0.01 a difference is reported as one. */
const SIGNIFICANT_P = 0.01;
/** An ECE above this is worth a sentence (common practice for a 10-bin reliability diagram). */
const ECE_NOTE = 0.05;

/**
 * Plain sentences about an outcomes report, worst first. Each carries its numbers and says what
 * they count, so that it reads on its own.
 */
export function writeOutcomeFindings(r: OutcomesReport, minLabelled: number): string[] {
  const found: Array<{ severity: number; text: string }> = [];
  const n = r.labelled;
  const rate = r.labelled_rate === null ? '' : ` (${pct(r.labelled_rate)})`;
  if (n === 0) {
    return [`None of the ${r.scored} answers in the window has an outcome recorded yet (POST /v1/outcomes), so nothing can be said of how right they were.`];
  }
  if (n < minLabelled) {
    found.push({ severity: 100, text: `Only ${n} of the ${r.scored} answers in the window have an outcome${rate}; with fewer than ${minLabelled} the figures below are rough.` });
  }

  const a = r.accuracy;
  found.push({
    severity: 50,
    text: `The model was right in ${pct(a.value ?? 0)} of the ${n} answers with an outcome (95% Wilson interval ${pct(a.ci_low ?? 0)} to ${pct(a.ci_high ?? 0)}); ${n} of ${r.scored} answers in the window have one${rate}.`,
  });

  const d = r.by_domain;
  if (d.in_domain.rows > 0 && d.out_of_domain.rows > 0 && d.p_value !== null) {
    const inA = d.in_domain.accuracy ?? 0;
    const outA = d.out_of_domain.accuracy ?? 0;
    const counts = `${pct(outA)} (${of(Math.round(outA * d.out_of_domain.rows), d.out_of_domain.rows)}) against ${pct(inA)} in domain (${of(Math.round(inA * d.in_domain.rows), d.in_domain.rows)}); Fisher's exact p ${formatP(d.p_value)}`;
    if (d.p_value < SIGNIFICANT_P && outA < inA) {
      found.push({ severity: 80, text: `Out-of-domain answers were right far less often: ${counts}. The domain flag is doing its job; treat flagged answers as unchecked.` });
    } else if (d.p_value < SIGNIFICANT_P) {
      found.push({ severity: 70, text: `Out-of-domain answers were right more often than in-domain ones: ${counts}. The flag is not separating worse answers from better ones here; look at what is flagged.` });
    } else {
      found.push({ severity: 20, text: `Out-of-domain answers were right ${counts}: no clear difference on these rows.` });
    }
  }

  // The class the model misses most, among classes with enough parts to say so.
  const weak = r.classes.filter((c) => c.rows >= 5 && c.recall !== null).sort((x, y) => (x.recall as number) - (y.recall as number))[0];
  if (weak && (weak.recall as number) < 0.8) {
    const k = r.confusion.labels.indexOf(weak.label);
    const row = r.confusion.counts[k] ?? [];
    let mostly = -1;
    row.forEach((c, j) => {
      if (j !== k && c > 0 && (mostly < 0 || c > (row[mostly] ?? 0))) mostly = j;
    });
    const instead = mostly >= 0 ? `; it answered ${r.confusion.labels[mostly]} for ${row[mostly]} of them` : '';
    found.push({ severity: 60 + 10 * (1 - (weak.recall as number)), text: `Of the ${weak.rows} parts that really were ${weak.label}, the model found ${pct(weak.recall as number)}${instead}.` });
  }

  if (r.ece.value !== null && r.ece.value > ECE_NOTE) {
    const worst = r.ece.bins.filter((b) => b.rows > 0).sort((x, y) => y.rows * Math.abs((y.confidence ?? 0) - (y.accuracy ?? 0)) - x.rows * Math.abs((x.confidence ?? 0) - (x.accuracy ?? 0)))[0];
    const where = worst ? `; the ${worst.rows} answers with a top probability from ${worst.low.toFixed(1)} to ${worst.high.toFixed(1)} claimed ${pct(worst.confidence ?? 0)} on average and were right ${pct(worst.accuracy ?? 0)}` : '';
    found.push({ severity: 40, text: `The probabilities do not mean what they say: expected calibration error ${r.ece.value.toFixed(3)}${where}.` });
  }

  const low = r.by_margin[0];
  const high = r.by_margin[r.by_margin.length - 1];
  if (low && high && low.rows > 0 && high.rows > 0) {
    found.push({ severity: 30, text: `Answers with a margin below ${low.high} were right ${pct(low.accuracy ?? 0)} of ${low.rows}; those with a margin of ${high.low} or more ${pct(high.accuracy ?? 0)} of ${high.rows}.` });
  }
  if (r.review.rows > 0 && r.not_review.rows > 0) {
    found.push({ severity: 25, text: `Answers marked for review were right ${pct(r.review.accuracy ?? 0)} of ${r.review.rows}, the others ${pct(r.not_review.accuracy ?? 0)} of ${r.not_review.rows}.` });
  }
  if (r.log_loss !== null && r.brier !== null) {
    found.push({ severity: 5, text: `Log-loss ${r.log_loss.toFixed(3)} nats and Brier score ${r.brier.toFixed(3)} (0 is perfect, 2 the worst) over the labelled answers.` });
  }
  return found.sort((x, y) => y.severity - x.severity).map((f) => f.text);
}
