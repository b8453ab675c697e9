import type { BundleFile } from '../../bundle/schema.js';

const pad = (s: string, n: number): string => (s.length >= n ? s : s + ' '.repeat(n - s.length));
const lpad = (s: string, n: number): string => (s.length >= n ? s : ' '.repeat(n - s.length) + s);

/** The validation metrics of a bundle as a plain-text table for the terminal. */
export function formatMetrics(b: BundleFile): string {
  const t = b.training;
  const m = t.metrics.validation;
  const lines: string[] = [];
  lines.push(`model ${b.name} version ${b.version}: ${b.features.length} features, ${b.classes.length} classes, layers ${[b.network.layers[0]?.inputs, ...b.network.layers.map((l) => l.outputs)].join('-')}`);
  lines.push(`rows ${t.rows.total} (train ${t.rows.train}, validation ${t.rows.validation}); epochs ${t.epochs_run}${t.stopped_early ? ' (stopped early)' : ''}, best ${t.best_epoch}`);
  if (!m) {
    lines.push('no validation rows: no held-out metrics');
    return lines.join('\n');
  }
  lines.push(`validation accuracy ${m.accuracy.toFixed(4)}, macro-F1 ${m.macro_f1.toFixed(4)}`);
  const width = Math.max(5, ...b.classes.map((c, k) => `${k} ${c}`.length)) + 2;
  lines.push(`${pad('class', width)}${lpad('precision', 10)}${lpad('recall', 8)}${lpad('f1', 8)}${lpad('support', 9)}`);
  for (const c of b.classes) {
    const pc = m.per_class[c];
    if (!pc) continue;
    lines.push(`${pad(c, width)}${lpad(pc.precision.toFixed(3), 10)}${lpad(pc.recall.toFixed(3), 8)}${lpad(pc.f1.toFixed(3), 8)}${lpad(String(pc.support), 9)}`);
  }
  lines.push('confusion (rows actual, columns predicted):');
  const cw = Math.max(6, ...m.confusion.flat().map((v) => String(v).length + 1));
  lines.push(pad('', width) + b.classes.map((_, k) => lpad(String(k), cw)).join(''));
  m.confusion.forEach((row, k) => lines.push(pad(`${k} ${b.classes[k]}`, width) + row.map((v) => lpad(String(v), cw)).join('')));
  const cal = t.metrics.calibration;
  lines.push(`temperature ${cal.temperature.toFixed(4)}; ECE (${cal.bins} bins) ${cal.ece_before?.toFixed(4) ?? '-'} before, ${cal.ece_after?.toFixed(4) ?? '-'} after`);
  return lines.join('\n');
}
