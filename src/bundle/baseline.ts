import { clopperPearsonInterval } from '../core/stats/proportion.js';
import { type AnyBundleFile, BUNDLE_FORMAT_V1 } from './schema.js';

/** The false-alarm rate a bundle's domain flag showed on its calibration rows, and how sure that figure is. */
export interface FalseAlarmBaseline {
  rate: number;
  /** The rows it rests on and its Clopper–Pearson 95% interval. */
  rows: number;
  low: number;
  high: number;
}

/**
 * The baseline that drift reports and alerts compare live out-of-domain rates against. Version 2
 * stores its interval; for version 1 it is worked out from the stored rate and row count.
 */
export function falseAlarmBaseline(file: AnyBundleFile): FalseAlarmBaseline {
  const h = file.domain.held_out;
  if (file.format !== BUNDLE_FORMAT_V1) return { rate: h.false_alarm_rate, rows: h.rows, low: file.domain.held_out.false_alarm_ci.low, high: file.domain.held_out.false_alarm_ci.high };
  const ci = clopperPearsonInterval(Math.round(h.false_alarm_rate * h.rows), h.rows);
  return { rate: h.false_alarm_rate, rows: h.rows, low: ci.low, high: ci.high };
}
