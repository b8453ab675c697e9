import type { OutcomesReport } from '../../contracts/outcomes-report.js';

const pct = (v: number | null): string => (v === null ? '–' : `${(v * 100).toFixed(1)}%`);

/** The outcomes report as a person reads it at the terminal: the headline figures, then the findings. */
export function formatOutcomesSummary(r: OutcomesReport): string {
  const d = r.by_domain;
  return [
    `outcomes report: ${r.model.name} version ${r.model.version}, answers from ${r.window.from} to ${r.window.to}`,
    `answers ${r.scored}, with an outcome ${r.labelled} (${pct(r.labelled_rate)}); right ${pct(r.accuracy.value)} (95% Wilson ${pct(r.accuracy.ci_low)} to ${pct(r.accuracy.ci_high)})`,
    `in domain right ${pct(d.in_domain.accuracy)} of ${d.in_domain.rows}, out of domain ${pct(d.out_of_domain.accuracy)} of ${d.out_of_domain.rows}; log-loss ${r.log_loss?.toFixed(3) ?? '–'}, Brier ${r.brier?.toFixed(3) ?? '–'}, ECE ${r.ece.value?.toFixed(3) ?? '–'}`,
    ...r.findings.map((f, i) => `${i + 1}. ${f}`),
  ].join('\n');
}
