import type { BundleFile } from '../../bundle/schema.js';
import { DETECTORS, type DetectorName } from '../../core/domain/detectors.js';

const pad = (s: string, n: number): string => (s.length >= n ? s : s + ' '.repeat(n - s.length));
const lpad = (s: string, n: number): string => (s.length >= n ? s : ' '.repeat(n - s.length) + s);

/** The detectors in the flag: the envelope and each optional one the bundle holds. */
export function votingDetectors(b: BundleFile): DetectorName[] {
  return DETECTORS.filter((d) => d === 'envelope' || b.domain[d] !== undefined);
}

const range = (values: number[]): string => {
  const lo = Math.min(...values);
  const hi = Math.max(...values);
  return lo === hi ? String(lo) : `${lo}-${hi}`;
};

/** What train and import print about a new bundle: networks, held-out metrics, calibration, domain flag. */
export function formatMetrics(b: BundleFile): string {
  const t = b.training;
  const m = t.metrics.held_out;
  const lines: string[] = [];
  const shape = [b.members[0]?.layers[0]?.inputs, ...(b.members[0]?.layers ?? []).map((l) => l.outputs)].join('-');
  const M = b.members.length;
  lines.push(`model ${b.name} version ${b.version}: ${b.features.length} features, ${b.classes.length} classes, layers ${shape}${M > 1 ? `, ${M} networks answering together` : ''}`);
  const src = t.source;
  const imported = src.kind === 'onnx';
  if (src.kind === 'onnx') {
    lines.push(`imported from ${src.onnx_file} (${src.producer}, operator set ${src.opset}); rows ${t.rows.total - t.rows.held_out} of --data${t.rows.held_out > 0 ? `, ${t.rows.held_out} held out (--calibrate-on)` : ''}`);
  } else {
    const mem = t.members;
    const stopped = mem.filter((x) => x.stopped_early).length;
    lines.push(
      `rows ${t.rows.total}: ${t.rows.folds > 1 ? `${t.rows.folds} folds, each network trained without one` : `one network, ${t.rows.held_out} rows held out`}; ` +
        `trained on ${range(mem.map((x) => x.train_rows))} rows, early stopping on ${range(mem.map((x) => x.early_stopping_rows))}; ` +
        `epochs ${range(mem.map((x) => x.epochs_run))} (best ${range(mem.map((x) => x.best_epoch))}${stopped > 0 ? `, ${stopped === mem.length ? 'all' : stopped} stopped early` : ''})`,
    );
  }
  if (!m) {
    lines.push('no held-out rows: no held-out metrics');
    return lines.join('\n');
  }
  // An imported network without --calibrate-on is measured on --data, which it may have been trained on.
  const on = imported && t.rows.held_out === 0
    ? 'accuracy on --data (not held out: it may be the training data)'
    : t.rows.folds > 1
      ? `out-of-fold accuracy (each of the ${t.rows.held_out} rows answered by networks that never saw it)`
      : `accuracy on the ${t.rows.held_out} held-out rows`;
  lines.push(`${on} ${m.accuracy.toFixed(4)}, macro-F1 ${m.macro_f1.toFixed(4)}`);
  const width = Math.max(5, ...b.classes.map((c, k) => `${k} ${c}`.length)) + 2;
  lines.push(`${pad('class', width)}${lpad('precision', 10)}${lpad('recall', 8)}${lpad('F1', 8)}${lpad('rows', 7)}`);
  for (const c of b.classes) {
    const pc = m.per_class[c];
    if (!pc) continue;
    lines.push(`${pad(c, width)}${lpad(pc.precision.toFixed(3), 10)}${lpad(pc.recall.toFixed(3), 8)}${lpad(pc.f1.toFixed(3), 8)}${lpad(String(pc.support), 7)}`);
  }
  lines.push('confusion (rows actual, columns predicted):');
  const cw = Math.max(6, ...m.confusion.flat().map((v) => String(v).length + 1));
  lines.push(pad('', width) + b.classes.map((_, k) => lpad(String(k), cw)).join(''));
  m.confusion.forEach((row, k) => lines.push(pad(`${k} ${b.classes[k]}`, width) + row.map((v) => lpad(String(v), cw)).join('')));
  lines.push(formatCalibration(b));
  lines.push(formatDomain(b));
  return lines.join('\n');
}

/** The temperature, how it was fitted, and log-loss, Brier score and ECE on the held-out rows before and after it. */
export function formatCalibration(b: BundleFile): string {
  const cal = b.training.metrics.calibration;
  const lines: string[] = [];
  const why = {
    fitted: `fitted on the ${b.training.rows.held_out} held-out rows (temperature scaling)`,
    separable: 'not sharpened: the held-out rows are separable, so their log-loss falls without end as the temperature goes to 0 and has no minimum to fit',
    flat: 'the held-out logits carry no information about it',
    not_fitted: 'not fitted: no labelled held-out rows (give --calibrate-on)',
  }[cal.fit];
  lines.push(`temperature ${cal.temperature.toFixed(4)}: ${why}`);
  if (cal.before && cal.after) {
    lines.push(`${pad('held-out rows', 16)}${lpad('log-loss', 10)}${lpad('Brier', 8)}${lpad(`ECE (${cal.bins} bins)`, 16)}`);
    for (const [name, v] of [['before (T = 1)', cal.before], ['after', cal.after]] as const) lines.push(`${pad(name, 16)}${lpad(v.log_loss.toFixed(4), 10)}${lpad(v.brier.toFixed(4), 8)}${lpad(v.ece.toFixed(4), 16)}`);
  }
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
  const failures = Math.round(h.false_alarm_rate * h.rows);
  const source = { out_of_fold: 'out-of-fold', validation: 'held-out', 'calibrate-on': '--calibrate-on', training: 'training (not held out)' }[h.source];
  lines.push(
    `domain flag: calibrated on ${h.rows} ${source} rows to pass ${h.level < dom.target_in_domain_rate ? h.level.toFixed(4) : dom.target_in_domain_rate}; ` +
      `false alarms ${h.false_alarm_rate.toFixed(4)} (${failures} of ${h.rows} left out one at a time; ${Math.round(h.false_alarm_ci.confidence * 100)}% interval ${h.false_alarm_ci.low.toFixed(4)}-${h.false_alarm_ci.high.toFixed(4)})`,
  );
  if (h.level < dom.target_in_domain_rate) {
    const voting = votingDetectors(b).length;
    lines.push(`${h.rows} rows support a pass rate of at most ${h.level.toFixed(4)} for these ${voting} detector${voting === 1 ? '' : 's'} voting together: calibrated to that`);
  }
  for (const l of dom.left_out) lines.push(`${l.detector} does not vote: ${l.reason}`);
  const asked = b.training.options.envelope_tolerance;
  if (typeof asked === 'number' && asked !== dom.envelope.tolerance) {
    lines.push(`envelope tolerance widened from ${asked} to ${dom.envelope.tolerance.toFixed(4)} of each range, its share of the one false-alarm budget`);
  }
  const threshold = (n: string): string => {
    if (n === 'envelope') return '0 outside';
    const t = (dom as Record<string, unknown>)[n] as { threshold?: number } | undefined;
    return t?.threshold !== undefined ? t.threshold.toFixed(3) : '';
  };
  const detectors = Object.keys(ev.pass_rate);
  const aside = new Set(['max_probability', ...dom.left_out.map((l) => l.detector)]);
  const label = (n: string): string => (aside.has(n) ? `${n}*` : n);
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
  lines.push('held-out: share of the calibration rows passed (composite: each row left out of the calibration in turn); probe columns: share flagged.');
  lines.push('* for comparison only, not part of the flag: calibrated alone to the target.');
  return lines.join('\n');
}
