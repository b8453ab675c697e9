import type { OutcomesReport } from '../contracts/outcomes-report.js';

/** The figures of an outcomes report, as the drift report also carries them. */
export type OutcomeFigures = Omit<OutcomesReport, 'model' | 'window' | 'created_at'>;
import { COLOURS, esc, fixed, pageStyle, pct, pValue, svg } from './html-parts.js';

/** Rows the actual class, columns the answered one; each cell shaded by its share of its row. */
function confusionChart(r: OutcomeFigures): string {
  const labels = r.confusion.labels;
  const n = labels.length;
  const cell = Math.max(40, Math.min(72, Math.floor(520 / Math.max(1, n))));
  const left = 120;
  const top = 70;
  const w = left + n * cell + 20;
  const h = top + n * cell + 40;
  const cells = r.confusion.counts
    .map((row, i) => {
      const total = row.reduce((s, c) => s + c, 0);
      return row
        .map((c, j) => {
          const share = total > 0 ? c / total : 0;
          const colour = i === j ? COLOURS.window : COLOURS.shifted;
          const x = left + j * cell;
          const y = top + i * cell;
          return `<rect x="${x}" y="${y}" width="${cell - 2}" height="${cell - 2}" fill="${c > 0 ? colour : '#fff'}" fill-opacity="${c > 0 ? (0.12 + 0.88 * share).toFixed(3) : 1}" stroke="${COLOURS.rule}"><title>${esc(`${labels[i]} answered ${labels[j]}: ${c} of ${total}`)}</title></rect><text x="${x + cell / 2 - 1}" y="${y + cell / 2 + 4}" font-size="12" text-anchor="middle" fill="${share > 0.5 ? '#fff' : COLOURS.ink}">${c}</text>`;
        })
        .join('');
    })
    .join('');
  const rowLabels = labels.map((l, i) => `<text x="${left - 8}" y="${top + i * cell + cell / 2 + 4}" font-size="11" text-anchor="end">${esc(l)}</text>`).join('');
  const colLabels = labels
    .map((l, j) => `<text x="${left + j * cell + cell / 2}" y="${top - 8}" font-size="11" text-anchor="start" transform="rotate(-35 ${left + j * cell + cell / 2} ${top - 8})">${esc(l)}</text>`)
    .join('');
  const axes = `<text x="${left + (n * cell) / 2}" y="${h - 10}" font-size="11" text-anchor="middle">answered</text><text x="12" y="${top + (n * cell) / 2}" font-size="11" transform="rotate(-90 12 ${top + (n * cell) / 2})" text-anchor="middle">what the part was</text>`;
  return svg('confusion', 'confusion matrix: rows what the part was, columns what the model answered', w, h, cells + rowLabels + colLabels + axes);
}

/** Accuracy against mean top probability per bin, with the diagonal a calibrated model would follow. */
function reliabilityChart(r: OutcomeFigures): string {
  const size = 320;
  const left = 44;
  const top = 10;
  const w = left + size + 20;
  const h = top + size + 40;
  const x = (v: number): number => left + v * size;
  const y = (v: number): number => top + (1 - v) * size;
  const most = Math.max(1, ...r.ece.bins.map((b) => b.rows));
  const bars = r.ece.bins
    .filter((b) => b.rows > 0)
    .map((b) => {
      const acc = b.accuracy ?? 0;
      const conf = b.confidence ?? 0;
      return `<rect x="${(x(b.low) + 1).toFixed(1)}" y="${y(acc).toFixed(1)}" width="${(x(b.high) - x(b.low) - 2).toFixed(1)}" height="${(y(0) - y(acc)).toFixed(1)}" fill="${COLOURS.window}" fill-opacity="${(0.35 + 0.65 * (b.rows / most)).toFixed(3)}"><title>${esc(`top probability ${b.low.toFixed(1)}–${b.high.toFixed(1)}: ${b.rows} answers, mean ${(conf * 100).toFixed(1)}%, right ${(acc * 100).toFixed(1)}%`)}</title></rect><circle cx="${x(conf).toFixed(1)}" cy="${y(acc).toFixed(1)}" r="3" fill="${COLOURS.ink}"/>`;
    })
    .join('');
  const ticks = [0, 0.5, 1].map((v) => `<text x="${x(v)}" y="${h - 22}" font-size="10" text-anchor="middle">${v}</text><text x="${left - 6}" y="${y(v) + 4}" font-size="10" text-anchor="end">${v}</text>`).join('');
  const frame = `<rect x="${left}" y="${top}" width="${size}" height="${size}" fill="none" stroke="${COLOURS.ink}"/><line x1="${x(0)}" y1="${y(0)}" x2="${x(1)}" y2="${y(1)}" stroke="${COLOURS.reference}" stroke-dasharray="5 4"/>`;
  const labels = `<text x="${left + size / 2}" y="${h - 6}" font-size="11" text-anchor="middle">top probability</text><text x="10" y="${top + size / 2}" font-size="11" transform="rotate(-90 10 ${top + size / 2})" text-anchor="middle">share right</text>`;
  return svg('reliability', 'reliability diagram: share of answers right against their top probability, per bin, with the diagonal of a calibrated model', w, h, frame + bars + ticks + labels);
}

/** Share right per margin band, and in and out of domain, as bars with their row counts. */
function marginChart(r: OutcomeFigures): string {
  const groups = [
    ...r.by_margin.map((b) => ({ name: `margin ${b.low}–${b.high}`, ...b, colour: COLOURS.window })),
    { name: 'in domain', ...r.by_domain.in_domain, colour: COLOURS.stable },
    { name: 'out of domain', ...r.by_domain.out_of_domain, colour: COLOURS.shifted },
  ];
  const w = 760;
  const h = 200;
  const bottom = 40;
  const gw = (w - 20) / groups.length;
  const y = (v: number): number => h - bottom - v * (h - bottom - 20);
  const bars = groups
    .map((g, i) => {
      const x0 = 10 + i * gw + gw * 0.2;
      const bw = gw * 0.6;
      const a = g.accuracy ?? 0;
      return `<rect x="${x0.toFixed(1)}" y="${y(a).toFixed(1)}" width="${bw.toFixed(1)}" height="${(h - bottom - y(a)).toFixed(1)}" fill="${g.colour}"><title>${esc(`${g.name}: ${g.rows} answers, right ${g.accuracy === null ? '–' : `${(a * 100).toFixed(1)}%`}`)}</title></rect><text x="${(x0 + bw / 2).toFixed(1)}" y="${(y(a) - 4).toFixed(1)}" font-size="10" text-anchor="middle">${pct(g.accuracy)}</text><text x="${(x0 + bw / 2).toFixed(1)}" y="${h - bottom + 14}" font-size="10" text-anchor="middle">${esc(g.name)}</text><text x="${(x0 + bw / 2).toFixed(1)}" y="${h - bottom + 27}" font-size="9" text-anchor="middle">${g.rows} rows</text>`;
    })
    .join('');
  return svg('margin', 'share of answers right per margin band and in and out of domain', w, h, `<line x1="6" y1="${h - bottom}" x2="${w - 6}" y2="${h - bottom}" stroke="${COLOURS.ink}"/>${bars}`);
}

/** The charts and the class table, with their headings: the outcomes page's, and the drift page's outcomes section. */
export function outcomeCharts(r: OutcomeFigures): string {
  const classRows = r.classes
    .map((c) => `<tr><td>${esc(c.label)}</td><td class="n">${c.rows}</td><td class="n">${fixed(c.precision)}</td><td class="n">${fixed(c.recall)}</td><td class="n">${fixed(c.f1)}</td></tr>`)
    .join('');
  return `<h2>What the parts were, against what the model answered</h2>
<div style="max-width:36rem">${confusionChart(r)}</div>
<table><thead><tr><th>class</th><th class="n">parts</th><th class="n">precision</th><th class="n">recall</th><th class="n">F1</th></tr></thead><tbody>${classRows}</tbody></table>
<h2>Did the probabilities mean what they said?</h2>
<p class="key">Bars: share right among the answers whose top probability fell in the bin (darker: more answers); dots: their mean top probability; dashed: a calibrated model.</p>
<div style="max-width:26rem">${reliabilityChart(r)}</div>
<h2>Share right by margin and by domain</h2>
${marginChart(r)}
<p>Answers marked for review were right ${pct(r.review.accuracy)} of ${r.review.rows}; the others ${pct(r.not_review.accuracy)} of ${r.not_review.rows}.</p>
`;
}

export function renderOutcomesHtml(r: OutcomesReport): string {
  const a = r.accuracy;
  const d = r.by_domain;
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">
<title>Outcomes report: ${esc(r.model.name)} ${esc(r.window.from.slice(0, 10))}</title>
${pageStyle(COLOURS.window)}</head><body>
<p class="meta">plumbline outcomes report</p>
<h1>${esc(r.model.name)} <small>version ${esc(r.model.version)}</small></h1>
<p class="meta">answers received ${esc(r.window.from)} to ${esc(r.window.to)} (UTC) · made ${esc(r.created_at)} · bundle ${esc(r.model.sha256.slice(0, 12))}</p>
<div class="tiles">
<div class="tile">answers<b>${r.scored}</b>${r.labelled} with an outcome (${pct(r.labelled_rate)})</div>
<div class="tile">right<b>${pct(a.value)}</b>95% Wilson ${pct(a.ci_low)}–${pct(a.ci_high)}</div>
<div class="tile">in domain, right<b>${pct(d.in_domain.accuracy)}</b>of ${d.in_domain.rows}</div>
<div class="tile">out of domain, right<b>${pct(d.out_of_domain.accuracy)}</b>of ${d.out_of_domain.rows} · Fisher p ${pValue(d.p_value)}</div>
<div class="tile">calibration<b>ECE ${fixed(r.ece.value)}</b>log-loss ${fixed(r.log_loss)} · Brier ${fixed(r.brier)}</div>
</div>
<h2>Findings</h2>
<ol>${r.findings.map((f) => `<li>${esc(f)}</li>`).join('')}</ol>
${outcomeCharts(r)}
<footer>Accuracy with its Wilson 95% interval (Newcombe 1998). Precision, recall and F1 per class; a dash where the model never answered a class or no part was of it. Log-loss in nats; Brier score in its multi-class form (0 best, 2 worst). ECE: expected calibration error of the top probability over ${r.ece.bins.length} equal-width bins (Guo et al. 2017). In and out of domain compared by Fisher's exact test, two-sided. Margin: top-1 minus top-2 probability. This report is decision support, not a safety function.</footer>
</body></html>
`;
}
