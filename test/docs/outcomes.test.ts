import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { formatOutcomesSummary } from '../../src/cli/actions/outcomes-summary.js';
import type { OutcomesReport } from '../../src/contracts/outcomes-report.js';
import { recordDemoOutcomes } from '../../src/demo/outcomes.js';
import { replayDemoDay } from '../../src/demo/replay.js';
import { outcomesReportFor } from '../../src/reports/outcomes-report.js';
import { readDoc } from '../helpers/doc-examples.js';
import { DAY_END, DAY_START, DEMO_DIR, demoBundle } from '../helpers/demo.js';
import { type TestService, startTestService } from '../helpers/service.js';

// docs/outcomes.md: its worked example, held to the report of the invented demo day as
// `plumbline demo` makes it.

const DOC = readDoc('docs/outcomes.md');
let svc: TestService;
let report: OutcomesReport;
beforeAll(async () => {
  svc = await startTestService({ bundles: [demoBundle()] });
  const day = await replayDemoDay(svc.app.scoring, 'moulding-quality', DEMO_DIR, DAY_START);
  await recordDemoOutcomes(svc.store.outcomes, 'moulding-quality', day.shots);
  report = (await outcomesReportFor(svc.store.outcomes, 'moulding-quality', { from: DAY_START, to: DAY_END })) as OutcomesReport;
}, 60_000);
afterAll(async () => {
  await svc.close();
});

describe('docs/outcomes.md', () => {
  it('quotes the headline lines of the demo day as the demo prints them', () => {
    const lines = formatOutcomesSummary(report).split('\n');
    const block = DOC.slice(DOC.indexOf('## Worked example'));
    expect(block).toContain(`${lines[1]}\n${lines[2]}\n`);
  });

  it('reads the figures of that report in its sentences', () => {
    const d = report.by_domain;
    const right = (s: { rows: number; accuracy: number | null }) => Math.round((s.accuracy ?? 0) * s.rows);
    const text = DOC.replace(/\s+/g, ' ');
    expect(text).toContain(`right in ${right(d.out_of_domain)} of ${d.out_of_domain.rows} inspected shots, against ${right(d.in_domain)} of ${d.in_domain.rows} in domain (Fisher's exact p = ${(d.p_value as number).toExponential(1)})`);
    const short = report.classes.find((c) => c.label === 'short_shot');
    const k = report.confusion.labels.indexOf('short_shot');
    const good = report.confusion.labels.indexOf('good');
    expect(text).toContain(`\`short_shot\` (${report.confusion.counts[k]?.[k]} of ${short?.rows} found; ${report.confusion.counts[k]?.[good]} called \`good\`)`);
    expect(report.by_margin[0]?.accuracy).toBe(0.5);
  });
});
