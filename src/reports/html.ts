import type { DriftReport, FeatureDrift } from '../contracts/drift-report.js';
import { FAULT_HOUR_P, faultHourP } from './findings.js';
import { COLOURS, esc, fixed, pageStyle, pct, pValue, svg } from './html-parts.js';
import { outcomeCharts } from './outcomes-html.js';

const bandColour = (band: string | null): string => (band === 'shifted' ? COLOURS.shifted : band === 'watch' ? COLOURS.watch : band === 'stable' ? COLOURS.stable : COLOURS.grey);

/** Out-of-domain share per hour as bars, with the expected rate as a dashed line. */
function hourlyChart(r: DriftReport): string {
  const w = 760;
  const h = 200;
  const left = 44;
  const bottom = 26;
  const rates = r.hourly.map((x) => (x.scored > 0 ? x.out_of_domain / x.scored : 0));
  const top = Math.max(0.05, r.out_of_domain.expected_rate * 2, ...rates);
  const bw = r.hourly.length > 0 ? (w - left - 10) / r.hourly.length : 0;
  const y = (v: number): number => h - bottom - (v / top) * (h - bottom - 10);
  const bars = r.hourly
    .map((x, i) => {
      const rate = rates[i] as number;
      const fault = faultHourP(x, r.out_of_domain.expected_ci_high ?? r.out_of_domain.expected_rate);
      const over = fault !== null && fault < FAULT_HOUR_P;
      return `<rect x="${(left + i * bw + 1).toFixed(1)}" y="${y(rate).toFixed(1)}" width="${Math.max(1, bw - 2).toFixed(1)}" height="${(h - bottom - y(rate)).toFixed(1)}" fill="${over ? COLOURS.shifted : COLOURS.window}"><title>${esc(x.hour.slice(0, 16))}Z: ${x.out_of_domain} of ${x.scored} out of domain</title></rect>`;
    })
    .join('');
  const labels = r.hourly
    .map((x, i) => (r.hourly.length <= 26 || i % Math.ceil(r.hourly.length / 24) === 0 ? `<text x="${(left + i * bw + bw / 2).toFixed(1)}" y="${h - 8}" font-size="9" text-anchor="middle">${esc(x.hour.slice(11, 13))}</text>` : ''))
    .join('');
  const e = y(r.out_of_domain.expected_rate);
  const axis = `<line x1="${left}" y1="${h - bottom}" x2="${w - 8}" y2="${h - bottom}" stroke="${COLOURS.ink}"/><text x="4" y="${y(top) + 4}" font-size="10">${pct(top)}</text><text x="4" y="${h - bottom}" font-size="10">0</text>`;
  const expected = `<line x1="${left}" y1="${e.toFixed(1)}" x2="${w - 8}" y2="${e.toFixed(1)}" stroke="${COLOURS.ink}" stroke-dasharray="5 4"/><text x="${w - 10}" y="${(e - 4).toFixed(1)}" font-size="10" text-anchor="end">expected ${pct(r.out_of_domain.expected_rate)}</text>`;
  return svg('hourly', 'out-of-domain share per hour against the expected rate', w, h, axis + bars + expected + labels);
}

/** PSI per feature as horizontal bars, with the 0.1 and 0.25 band lines. */
function psiChart(features: FeatureDrift[]): string {
  const w = 760;
  const row = 22;
  const left = 190;
  const h = features.length * row + 34;
  const top = Math.max(0.5, ...features.map((f) => f.psi ?? 0));
  const x = (v: number): number => left + (Math.min(v, top) / top) * (w - left - 60);
  const bars = features
    .map((f, i) => {
      const y0 = 8 + i * row;
      const v = f.psi ?? 0;
      return `<text x="${left - 8}" y="${y0 + 14}" font-size="11" text-anchor="end">${esc(f.name)}</text><rect x="${left}" y="${y0 + 3}" width="${Math.max(1, x(v) - left).toFixed(1)}" height="${row - 8}" fill="${COLOURS.window}"/><text x="${(x(v) + 4).toFixed(1)}" y="${y0 + 14}" font-size="10">${fixed(f.psi, 3)}</text>`;
    })
    .join('');
  const guide = (v: number, label: string): string =>
    `<line x1="${x(v).toFixed(1)}" y1="4" x2="${x(v).toFixed(1)}" y2="${h - 22}" stroke="${COLOURS.ink}" stroke-dasharray="3 3"/><text x="${x(v).toFixed(1)}" y="${h - 8}" font-size="10" text-anchor="middle">${label}</text>`;
  return svg('psi', 'population stability index per feature with the 0.1 and 0.25 lines', w, h, bars + guide(0.1, '0.1 watch') + guide(0.25, '0.25 shifted'));
}

/** Training against window fractions on the training decile bins of one feature. */
function histogram(f: FeatureDrift): string {
  const w = 240;
  const h = 120;
  const n = f.bins.reference.length;
  const top = Math.max(0.2, ...f.bins.reference, ...f.bins.window);
  const bw = (w - 10) / n;
  const y = (v: number): number => h - 18 - (v / top) * (h - 28);
  const bars = f.bins.reference
    .map((ref, i) => {
      const win = f.bins.window[i] ?? 0;
      const x0 = 5 + i * bw;
      return `<rect x="${(x0 + 1).toFixed(1)}" y="${y(ref).toFixed(1)}" width="${(bw / 2 - 1).toFixed(1)}" height="${(h - 18 - y(ref)).toFixed(1)}" fill="${COLOURS.reference}"/><rect x="${(x0 + bw / 2).toFixed(1)}" y="${y(win).toFixed(1)}" width="${(bw / 2 - 1).toFixed(1)}" height="${(h - 18 - y(win)).toFixed(1)}" fill="${COLOURS.window}"/>`;
    })
    .join('');
  const first = f.bins.edges[0];
  const last = f.bins.edges[f.bins.edges.length - 1];
  const axis = `<line x1="4" y1="${h - 18}" x2="${w - 4}" y2="${h - 18}" stroke="${COLOURS.ink}"/>${first !== undefined ? `<text x="${5 + bw}" y="${h - 5}" font-size="9" text-anchor="middle">${esc(String(first))}</text>` : ''}${last !== undefined ? `<text x="${5 + (n - 1) * bw}" y="${h - 5}" font-size="9" text-anchor="middle">${esc(String(last))}</text>` : ''}`;
  return svg(`histogram-${f.name}`, `${f.name}: training and window shares per training decile bin`, w, h, bars + axis);
}

/** Predicted-class shares, the held-out answers at training beside the window. */
function classChart(r: DriftReport): string {
  const classes = Object.keys(r.predictions.fractions);
  const w = 760;
  const h = 180;
  const top = Math.max(0.2, ...Object.values(r.predictions.fractions), ...Object.values(r.predictions.reference_fractions));
  const gw = (w - 20) / Math.max(1, classes.length);
  const y = (v: number): number => h - 30 - (v / top) * (h - 44);
  const bars = classes
    .map((c, i) => {
      const a = r.predictions.reference_fractions[c] ?? 0;
      const b = r.predictions.fractions[c] ?? 0;
      const x0 = 10 + i * gw + gw * 0.15;
      const bw = gw * 0.33;
      return `<rect x="${x0.toFixed(1)}" y="${y(a).toFixed(1)}" width="${bw.toFixed(1)}" height="${(h - 30 - y(a)).toFixed(1)}" fill="${COLOURS.reference}"/><rect x="${(x0 + bw + 2).toFixed(1)}" y="${y(b).toFixed(1)}" width="${bw.toFixed(1)}" height="${(h - 30 - y(b)).toFixed(1)}" fill="${COLOURS.window}"/><text x="${(x0 + bw).toFixed(1)}" y="${h - 14}" font-size="11" text-anchor="middle">${esc(c)}</text><text x="${(x0 + bw + 2 + bw / 2).toFixed(1)}" y="${(y(b) - 3).toFixed(1)}" font-size="9" text-anchor="middle">${pct(b)}</text>`;
    })
    .join('');
  return svg('classes', 'predicted-class shares of the held-out answers at training and in the window', w, h, `<line x1="6" y1="${h - 30}" x2="${w - 6}" y2="${h - 30}" stroke="${COLOURS.ink}"/>${bars}`);
}

/** How right the window's answers were, once their outcomes are known: the outcomes report's figures and charts. */
function outcomesSection(o: NonNullable<DriftReport['outcomes']>): string {
  const d = o.by_domain;
  return `<h2 id="outcomes">Outcomes: how right the answers were</h2>
<div class="tiles">
<div class="tile">with an outcome<b>${o.labelled}</b>of ${o.scored} (${pct(o.labelled_rate)})</div>
<div class="tile">right<b>${pct(o.accuracy.value)}</b>95% Wilson ${pct(o.accuracy.ci_low)}–${pct(o.accuracy.ci_high)}</div>
<div class="tile">in domain, right<b>${pct(d.in_domain.accuracy)}</b>of ${d.in_domain.rows}</div>
<div class="tile">out of domain, right<b>${pct(d.out_of_domain.accuracy)}</b>of ${d.out_of_domain.rows} · Fisher p ${pValue(d.p_value)}</div>
</div>
<ol>${o.findings.map((f) => `<li>${esc(f)}</li>`).join('')}</ol>
${outcomeCharts(o)}`;
}

export function renderReportHtml(r: DriftReport): string {
  const verdictColour = r.verdict === 'insufficient data' ? COLOURS.grey : bandColour(r.verdict);
  const o = r.out_of_domain;
  const featureRows = r.features
    .map(
      (f) =>
        `<tr><td>${esc(f.name)}</td><td>${esc(f.unit)}</td><td class="n">${f.mean === null ? '–' : f.mean.toPrecision(5)}</td><td class="n">${f.reference_mean.toPrecision(5)}</td><td class="n"><span class="dot" style="background:${bandColour(f.band)}"></span>${fixed(f.psi)} ${esc(f.band ?? '')}</td><td class="n">${fixed(f.ks.d)}</td><td class="n">${pValue(f.p_adjusted)}</td><td class="n">${fixed(f.wasserstein, 2)}</td><td class="n">${f.outside_count}</td></tr>`,
    )
    .join('');
  const histograms = r.features.map((f) => `<figure><figcaption>${esc(f.name)}${f.unit ? ` (${esc(f.unit)})` : ''}: PSI ${fixed(f.psi)} <b style="color:${bandColour(f.band)}">${esc(f.band ?? '')}</b></figcaption>${histogram(f)}</figure>`).join('');
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">
<title>Drift report: ${esc(r.model.name)} ${esc(r.window.from.slice(0, 10))}</title>
${pageStyle(verdictColour)}</head><body>
<p class="meta">plumbline drift report ${esc(r.id)}</p>
<h1>${esc(r.model.name)} <small>version ${esc(r.model.version)}</small></h1>
<p class="meta">window ${esc(r.window.from)} to ${esc(r.window.to)} (UTC) · made ${esc(r.created_at)} · bundle ${esc(r.model.sha256.slice(0, 12))}</p>
<p><span class="verdict" data-verdict="${esc(r.verdict)}">${esc(r.verdict)}</span></p>
<div class="tiles">
<div class="tile">scored<b>${r.counts.scored}</b></div>
<div class="tile">out of domain<b>${pct(o.rate)}</b>95% Wilson ${pct(o.ci_low)}–${pct(o.ci_high)}</div>
<div class="tile">expected (calibration)<b>${pct(o.expected_rate)}</b>${o.expected_ci_high !== undefined ? `95% up to ${pct(o.expected_ci_high)} on ${o.expected_rows ?? 0} rows · ` : ''}binomial p ${pValue(o.p_value)}</div>
<div class="tile">refused requests<b>${r.counts.rejected}</b></div>
<div class="tile">marked for review<b>${pct(r.margin.review_rate)}</b></div>
</div>
<h2>Findings</h2>
<ol>${r.findings.map((f) => `<li>${esc(f)}</li>`).join('')}</ol>
<h2>Out-of-domain answers per hour</h2>
${hourlyChart(r)}
<h2>Population stability index per feature</h2>
${psiChart(r.features)}
<h2>Each feature: training against window</h2>
<p class="key">Shares per training decile bin: <span style="background:${COLOURS.reference}"></span>training <span style="background:${COLOURS.window}"></span>window; the PSI band is in each caption and in the table</p>
<div class="grid">${histograms}</div>
<table><thead><tr><th>feature</th><th>unit</th><th class="n">mean</th><th class="n">training mean</th><th class="n">PSI</th><th class="n">KS D</th><th class="n">adjusted p</th><th class="n">W1 (SD)</th><th class="n">outside</th></tr></thead><tbody>${featureRows}</tbody></table>
<h2>Predicted classes</h2>
<p class="key"><span style="background:${COLOURS.reference}"></span>held-out answers at training <span style="background:${COLOURS.window}"></span>window · chi-square p ${pValue(r.predictions.chi_square.p_value)} · Jensen-Shannon distance ${fixed(r.predictions.js_distance)}</p>
${classChart(r)}
<h2>Margin</h2>
<p>Mean margin (top-1 minus top-2 probability) ${fixed(r.margin.mean)} against ${fixed(r.margin.reference_mean)} on the held-out answers at training; KS D ${fixed(r.margin.ks.d)}, p ${pValue(r.margin.ks.p_value)}.</p>
${r.outcomes ? outcomesSection(r.outcomes) : ''}<footer>PSI: population stability index on the training decile bins (bands, common practice: below 0.1 stable, 0.1–0.25 watch, 0.25 and above shifted). KS: two-sample Kolmogorov-Smirnov against the bundle's reference sample, p-values adjusted across features by Benjamini-Hochberg. W1: Wasserstein-1 distance in training standard deviations. Out-of-domain rate with its Wilson interval, tested (exact one-sided binomial) against the upper end of the 95% Clopper-Pearson interval of the false-alarm rate measured when the flag was calibrated.${r.sample.reservoir ? ` KS and W1 use a seeded uniform sample of ${r.sample.cap} rows.` : ''} This report is decision support, not a safety function.</footer>
</body></html>
`;
}
