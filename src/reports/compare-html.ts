import type { CompareReport } from '../contracts/compare-report.js';
import { COLOURS, esc, pageStyle, pct, pValue } from './html-parts.js';

/** The comparison as a self-contained page: the figures, the findings and the label table. */
export function renderCompareHtml(r: CompareReport): string {
  const head = `<tr><th>logged \\ candidate</th>${r.labels.candidate.map((c) => `<th class="n">${esc(c)}</th>`).join('')}</tr>`;
  const body = r.labels.counts
    .map((row, i) => `<tr><th>${esc(r.labels.current[i] ?? '')}</th>${row.map((c, j) => `<td class="n"${r.labels.current[i] === r.labels.candidate[j] ? ' style="font-weight:600"' : ''}>${c}</td>`).join('')}</tr>`)
    .join('');
  const a = r.accuracy;
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">
<title>Candidate comparison: ${esc(r.model)} against ${esc(r.candidate.name)} ${esc(r.candidate.version)}</title>
${pageStyle(COLOURS.window)}</head><body>
<p class="meta">plumbline candidate comparison</p>
<h1>${esc(r.model)}: logged answers against ${esc(r.candidate.name)} <small>version ${esc(r.candidate.version)}</small></h1>
<p class="meta">answers received ${esc(r.window.from)} to ${esc(r.window.to)} (UTC) · made ${esc(r.created_at)} · candidate ${esc(r.candidate.sha256.slice(0, 12))} · logged by ${r.current.map((m) => `version ${esc(m.version)} (${esc(m.sha256.slice(0, 12))})`).join(', ')}</p>
<div class="tiles">
<div class="tile">rescored<b>${r.rows}</b>${r.skipped} left out</div>
<div class="tile">same label<b>${pct(r.agreement.rate)}</b>${r.agreement.rows} of ${r.rows}</div>
<div class="tile">in domain<b>${pct(r.in_domain.candidate)}</b>candidate; logged ${pct(r.in_domain.current)}</div>
<div class="tile">right, candidate<b>${pct(a.candidate.value)}</b>95% Wilson ${pct(a.candidate.ci_low)}–${pct(a.candidate.ci_high)}</div>
<div class="tile">right, logged<b>${pct(a.current.value)}</b>of ${r.labelled} with an outcome · McNemar p ${pValue(r.mcnemar.p_value)}</div>
</div>
<h2>Findings</h2>
<ol>${r.findings.map((f) => `<li>${esc(f)}</li>`).join('')}</ol>
<h2>Logged label against the candidate's</h2>
<table><thead>${head}</thead><tbody>${body}</tbody></table>
<footer>Accuracy on the rescored answers with an outcome, with Wilson 95% intervals (Newcombe 1998); the two compared by McNemar's exact test (McNemar 1947) on the answers where exactly one was right: ${r.mcnemar.candidate_only} candidate alone, ${r.mcnemar.current_only} logged alone. This comparison is decision support, not a safety function.</footer>
</body></html>
`;
}
