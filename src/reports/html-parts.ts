// The pieces the report pages share (the drift report's and the outcomes report's): a
// self-contained page, inline CSS and SVG, no script, no font or image from anywhere.

// Every string put into a page goes through esc, the formatted numbers included: a p-value
// written "< 1e-15" is text, and a raw "<" in text is an HTML parse error.
export const esc = (s: string): string => s.replace(/[&<>"']/g, (c) => `&#${c.charCodeAt(0)};`);
export const pct = (v: number | null): string => esc(v === null ? '–' : `${(v * 100).toFixed(v < 0.1 ? 2 : 1)}%`);
export const fixed = (v: number | null, digits = 3): string => esc(v === null ? '–' : v.toFixed(digits));
export const pValue = (p: number | null): string => esc(p === null ? '–' : p < 1e-15 ? '< 1e-15' : p < 0.001 ? p.toExponential(1) : p.toFixed(3));

export const COLOURS = { ink: '#1f2a2e', paper: '#fbfaf6', rule: '#d8d2c4', reference: '#8c9aa3', window: '#2f5d62', stable: '#3f7d4e', watch: '#b7791f', shifted: '#a23b2a', grey: '#7a7a7a' };

export function svg(name: string, label: string, width: number, height: number, body: string): string {
  return `<svg data-chart="${esc(name)}" role="img" aria-label="${esc(label)}" viewBox="0 0 ${width} ${height}" width="100%" preserveAspectRatio="xMinYMin meet">${body}</svg>`;
}

/** The style element of a report page; `accent` colours its verdict badge. */
export function pageStyle(accent: string): string {
  return `<style>
body{font:15px/1.45 system-ui,sans-serif;color:${COLOURS.ink};background:${COLOURS.paper};margin:0 auto;max-width:64rem;padding:1.2rem 1.5rem}
h1{font-size:1.5rem;margin:.2rem 0}h2{font-size:1.1rem;margin-top:1.8rem;border-bottom:1px solid ${COLOURS.rule};padding-bottom:.2rem}
.meta{color:#4b5a60;font-size:.9rem}.verdict{display:inline-block;padding:.35rem .9rem;border-radius:4px;color:#fff;font-weight:600;background:${accent};text-transform:uppercase;letter-spacing:.05em}
.tiles{display:flex;gap:1rem;flex-wrap:wrap;margin:1rem 0}.tile{border:1px solid ${COLOURS.rule};border-radius:4px;padding:.5rem .8rem;min-width:10rem;background:#fff}.tile b{display:block;font-size:1.3rem}
table{border-collapse:collapse;width:100%;font-size:.85rem}td,th{border-bottom:1px solid ${COLOURS.rule};padding:.25rem .4rem;text-align:left}.n{text-align:right;font-variant-numeric:tabular-nums}
.dot{display:inline-block;width:.7em;height:.7em;border-radius:50%;margin-right:.3em}
.grid{display:grid;grid-template-columns:repeat(auto-fill,minmax(15rem,1fr));gap:.8rem}figure{margin:0;background:#fff;border:1px solid ${COLOURS.rule};border-radius:4px;padding:.4rem}figcaption{font-size:.8rem}
.key span{display:inline-block;width:.8em;height:.8em;margin:0 .3em 0 .8em;vertical-align:middle}
ol li{margin:.3rem 0}footer{margin-top:2rem;font-size:.8rem;color:#4b5a60}
@media print{body{background:#fff;max-width:none}.tile,figure{break-inside:avoid}}
</style>`;
}
