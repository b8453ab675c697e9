import { existsSync, writeFileSync } from 'node:fs';
import { type Browser, chromium } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildDriftReport } from '../../src/reports/build-report.js';
import { renderReportHtml } from '../../src/reports/html.js';
import { DAY_END, DAY_START, demoDayService } from '../helpers/demo.js';
import { tempDir } from '../helpers/datasets.js';

// Debian's chromium, driven by playwright-core (.ci/run installs it; no browser is downloaded).
// playwright starts it with a fresh temporary profile of its own.
const CHROMIUM = '/usr/bin/chromium';

describe.skipIf(!existsSync(CHROMIUM))('the drift report page in a real browser (headless Chromium)', () => {
  const tmp = tempDir();
  let browser: Browser;
  let file = '';
  beforeAll(async () => {
    const svc = await demoDayService();
    const report = await buildDriftReport(svc.store.drift, svc.registry.get('moulding-quality')!.bundle, { from: DAY_START, to: DAY_END }, { id: 'page-test', createdAt: new Date() });
    await svc.close();
    file = tmp.file('report.html', renderReportHtml(report));
    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    });
  }, 60_000);
  afterAll(async () => {
    await browser?.close();
    tmp.remove();
  });

  it('draws every chart and asks the network for nothing', async () => {
    const page = await browser.newPage({ viewport: { width: 1200, height: 900 } });
    const requested: string[] = [];
    page.on('request', (r) => requested.push(r.url()));
    await page.goto(`file://${file}`);
    const charts = await page.$$eval('svg[data-chart]', (svgs) =>
      svgs.map((s) => {
        const box = s.getBoundingClientRect();
        return { name: s.getAttribute('data-chart'), width: box.width, height: box.height, shapes: s.querySelectorAll('rect').length };
      }),
    );
    expect(charts.map((c) => c.name)).toEqual(expect.arrayContaining(['hourly', 'psi', 'classes', 'histogram-melt_temp_c', 'histogram-cushion_mm']));
    expect(charts).toHaveLength(3 + 10);
    for (const c of charts) {
      expect(c.width, c.name ?? '').toBeGreaterThan(100);
      expect(c.height, c.name ?? '').toBeGreaterThan(50);
      expect(c.shapes, c.name ?? '').toBeGreaterThan(1);
    }
    expect(await page.textContent('.verdict')).toBe('shifted');
    expect(requested).toEqual([`file://${file}`]);
    await page.close();
  });

  it('prints to a PDF with its print stylesheet', async () => {
    const page = await browser.newPage();
    await page.goto(`file://${file}`);
    const pdf = await page.pdf({ format: 'A4' });
    writeFileSync(tmp.file('report.pdf'), pdf);
    expect(pdf.subarray(0, 5).toString()).toBe('%PDF-');
    expect(pdf.length).toBeGreaterThan(20_000);
    await page.close();
  });
});
