import { describe, expect, it } from 'vitest';
import { formatMetrics } from '../../src/cli/actions/metrics-table.js';
import { demoBundle } from '../helpers/demo.js';
import { fencedBlocks, readDoc } from '../helpers/doc-examples.js';

// docs/domain.md quotes the demo bundle's calibration and evaluation as `train` printed them, and
// reads a few of its figures in prose: each is recomputed here from the committed bundle.

const DOC = readDoc('docs/domain.md');
const bundle = (() => {
  const b = demoBundle();
  if (b.format !== 'plumbline-bundle/2') throw new Error('the demo bundle is not format 2');
  return b;
})();

describe('docs/domain.md', () => {
  it('quotes the lines train prints from the demo bundle, unchanged and in order', () => {
    const block = fencedBlocks(DOC).find((b) => b.body.startsWith('temperature '));
    expect(block).toBeDefined();
    expect(formatMetrics(bundle)).toContain(block?.body);
    expect((block?.body ?? '').split('\n').length).toBeGreaterThan(20);
  });

  it('gives the demo bundle false alarms and their interval', () => {
    const h = bundle.domain.held_out;
    expect(DOC).toContain(`The demo bundle: ${Math.round(h.false_alarm_rate * h.rows)} false alarms in ${h.rows.toLocaleString('en')} out-of-fold rows, a rate of ${h.false_alarm_rate} with a 95 % interval\nof ${h.false_alarm_ci?.low.toFixed(4)} to ${h.false_alarm_ci?.high.toFixed(4)}.`);
  });

  it('reads the evaluation table with the figures the bundle stores', () => {
    const t = bundle.training;
    expect(DOC).toContain(`This is the invented demo model: ${t.rows.total.toLocaleString('en')} rows, five folds, five members.`);
    expect(t.rows.folds).toBe(5);
    expect(bundle.members).toHaveLength(5);
    expect(bundle.domain.envelope.tolerance).toBe(t.options.envelope_tolerance);
    expect(DOC).toContain(`The envelope kept the asked\ntolerance of ${bundle.domain.envelope.tolerance}`);
    const probes = bundle.domain.evaluation.probes;
    const auroc = (name: string, detector: string) => probes.find((p) => p.name === name)?.auroc[detector];
    expect(DOC).toContain(`worse than chance far out (${auroc('scaled_100x', 'disagreement')?.toFixed(2)} at 100 times the range)`);
    expect(DOC).toContain(`better than chance on the nearer probes (${auroc('scaled_2x', 'disagreement')?.toFixed(2)})`);
    // "their AUROC is below 0.5": energy and max_probability, on every probe family
    for (const p of probes) for (const d of ['energy', 'max_probability']) expect(p.auroc[d]).toBeLessThan(0.5);
    expect(probes.every((p) => p.rows === 500)).toBe(true);
  });
});
