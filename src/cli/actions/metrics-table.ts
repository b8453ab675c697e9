import type { BundleFile } from '../../bundle/schema.js';

const pad = (s: string, n: number): string => (s.length >= n ? s : s + ' '.repeat(n - s.length));
const lpad = (s: string, n: number): string => (s.length >= n ? s : ' '.repeat(n - s.length) + s);

/** The validation metrics of a bundle as a plain-text table for the terminal. */
export function formatMetrics(b: BundleFile): string {
  const t = b.training;
  const m = t.metrics.validation;
  const lines: string[] = [];
  lines.push(`model ${b.name} version ${b.version}: ${b.features.length} features, ${b.classes.length} classes, layers ${[b.network.layers[0]?.inputs, ...b.network.layers.map((l) => l.outputs)].join('-')}`);
  const src = t.source;
  const imported = src.kind === 'onnx';
  lines.push(
    src.kind === 'onnx'
      ? `imported from ${src.onnx_file} (${src.producer}, operator set ${src.opset}); rows ${t.rows.train} of --data${t.rows.validation > 0 ? `, ${t.rows.validation} held out (--calibrate-on)` : ''}`
      : `rows ${t.rows.total} (train ${t.rows.train}, validation ${t.rows.validation}); epochs ${t.epochs_run}${t.stopped_early ? ' (stopped early)' : ''}, best ${t.best_epoch}`,
  );
  if (!m) {
    lines.push('no validation rows: no held-out metrics');
    return lines.join('\n');
  }
  // An imported network without --calibrate-on is measured on --data, which it may have been trained on.
  const on = imported && t.rows.validation === 0 ? 'accuracy on --data (not held out: it may be the training data)' : 'validation accuracy';
  lines.push(`${on} ${m.accuracy.toFixed(4)}, macro-F1 ${m.macro_f1.toFixed(4)}`);
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
  lines.push(formatDomain(b));
  return lines.join('\n');
}

/**
 * The domain flag's calibration and its evaluation: per detector the threshold, the share of
 * held-out in-domain rows it passes, and the share of each probe family it flags (AUROC below).
 */
export function formatDomain(b: BundleFile): string {
  const dom = b.domain;
  const ev = dom.evaluation;
  const h = dom.held_out;
  const lines: string[] = [];
  lines.push(
    `domain flag: calibrated on ${h.rows} ${h.source} rows to pass ${dom.target_in_domain_rate}; measured ${h.in_domain_rate.toFixed(4)} (false alarms ${h.false_alarm_rate.toFixed(4)})`,
  );
  const asked = b.training.options.envelope_tolerance;
  if (typeof asked === 'number' && asked !== dom.envelope.tolerance) {
    lines.push(`envelope tolerance widened from ${asked} to ${dom.envelope.tolerance.toFixed(4)} of each range, so that held-out rows keep within half the false-alarm budget`);
  }
  const threshold = (n: string): string => {
    if (n === 'envelope') return '0 outside';
    const t = (dom as Record<string, unknown>)[n] as { threshold?: number } | undefined;
    return t?.threshold !== undefined ? t.threshold.toFixed(3) : '';
  };
  const detectors = Object.keys(ev.pass_rate);
  const label = (n: string): string => (n === 'max_probability' ? 'max_probability*' : n);
  const w = Math.max(...detectors.map((n) => label(n).length)) + 2;
  const cols = ev.probes.map((p) => p.name);
  const cw = Math.max(9, ...cols.map((c) => c.length + 2));
  lines.push(`${pad('detector', w)}${lpad('threshold', 11)}${lpad('held-out', 10)}${cols.map((c) => lpad(c, cw)).join('')}`);
  for (const n of detectors) {
    const rates = ev.probes.map((p) => lpad((p.detection_rate[n] ?? 0).toFixed(3), cw)).join('');
    lines.push(`${pad(label(n), w)}${lpad(threshold(n), 11)}${lpad((ev.pass_rate[n] ?? 0).toFixed(3), 10)}${rates}`);
  }
  lines.push(`AUROC, held-out against each probe family (1 separates them, 0.5 cannot tell, below 0.5 ranks the probes as more typical):`);
  for (const n of detectors.filter((d) => d !== 'composite')) {
    const a = ev.probes.map((p) => lpad(p.auroc[n] === null || p.auroc[n] === undefined ? '-' : (p.auroc[n] as number).toFixed(3), cw)).join('');
    lines.push(`${pad(label(n), w)}${lpad('', 21)}${a}`);
  }
  lines.push('held-out: share of in-domain rows passed; probe columns: share flagged. * for comparison only: not part of the flag.');
  return lines.join('\n');
}
