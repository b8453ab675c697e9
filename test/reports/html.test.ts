import { parse } from 'parse5';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildDriftReport } from '../../src/reports/build-report.js';
import { renderReportHtml } from '../../src/reports/html.js';
import type { DriftReport } from '../../src/contracts/drift-report.js';
import { DAY_END, DAY_START, demoDayService } from '../helpers/demo.js';
import type { TestService } from '../helpers/service.js';

// The page is checked with parse5, a WHATWG-conformant HTML parser, reporting every parse error
// the HTML Living Standard defines (section 13.2.2, "Parse errors").
function parseErrors(html: string): string[] {
  const errors: string[] = [];
  parse(html, { onParseError: (e) => errors.push(`${e.code} at line ${e.startLine}, column ${e.startCol}`) });
  return errors;
}

let svc: TestService;
let report: DriftReport;
beforeAll(async () => {
  svc = await demoDayService();
  const bundle = svc.registry.get('moulding-quality')!.bundle;
  report = await buildDriftReport(svc.store.drift, bundle, { from: DAY_START, to: DAY_END }, { id: 'r1', createdAt: new Date('2026-12-01T02:00:00Z') });
});
afterAll(async () => {
  await svc.close();
});

describe('the drift report page', () => {
  it('parses without a single HTML parse error, with p-values below 1e-15 and markup characters in names', () => {
    // the demo day's shifted melt temperature, and a window whose tiny p-values print as "< 1e-15"
    const tiny: DriftReport = {
      ...report,
      out_of_domain: { ...report.out_of_domain, p_value: 0 },
      features: report.features.map((f, i) => (i === 0 ? { ...f, name: 'a<b & "c"', unit: "<'mm'>", p_adjusted: 0 } : f)),
      findings: ['p < 1e-15 & more', ...report.findings],
    };
    const html = renderReportHtml(tiny);
    expect(html).toContain('&#60; 1e-15');
    expect(html).toContain('a&#60;b &#38; &#34;c&#34;');
    expect(parseErrors(html)).toEqual([]);
    expect(parseErrors(renderReportHtml(report))).toEqual([]);
    // the parser is strict enough to catch the mistake this test guards against
    expect(parseErrors('<!doctype html><html><head><title>t</title></head><body><p>p < 1e-15</p></body></html>')).not.toEqual([]);
  });

  it('draws the window bars of every feature in the page teal, whatever the band; the band is in the caption and the table dot', () => {
    const html = renderReportHtml(report);
    expect(report.features.some((f) => f.band === 'shifted')).toBe(true);
    const charts = [...html.matchAll(/<svg data-chart="histogram-[^"]*"[^>]*>(.*?)<\/svg>/g)].map((m) => m[1] as string);
    expect(charts).toHaveLength(report.features.length);
    for (const chart of charts) {
      const fills = new Set([...chart.matchAll(/<rect [^>]*fill="(#[0-9a-f]{6})"/g)].map((m) => m[1]));
      // training grey and window teal, nothing else
      expect([...fills].sort()).toEqual(['#2f5d62', '#8c9aa3']);
    }
    const psi = html.match(/<svg data-chart="psi"[^>]*>(.*?)<\/svg>/)?.[1] ?? '';
    expect(new Set([...psi.matchAll(/<rect [^>]*fill="(#[0-9a-f]{6})"/g)].map((m) => m[1]))).toEqual(new Set(['#2f5d62']));
    // the shifted band still shows: in the caption badge and the table's dot
    const melt = report.features.find((f) => f.band === 'shifted')!;
    expect(html).toContain(`${melt.name} (${melt.unit}): PSI ${melt.psi!.toFixed(3)} <b style="color:#a23b2a">shifted</b>`);
    expect(html).toMatch(/<span class="dot" style="background:#a23b2a"><\/span>/);
  });
});
