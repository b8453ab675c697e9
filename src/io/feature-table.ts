import { MAX_FEATURE_MAGNITUDE } from '../core/network.js';
import { type CsvSource, DataFileError, openCsv, parseDecimal } from './csv.js';

export interface ColumnPlan {
  featureNames: string[];
  featureIndex: number[];
  labelIndex: number | null;
  /** Fields every row must have: the header's count. */
  width: number;
}

/**
 * Picks the feature columns by name: the given list in its order, or every column but the label.
 * Columns not picked (ids, timestamps, the label when scoring) are ignored.
 */
export function planColumns(header: string[], file: string, options: { features?: string[]; label?: string; ignore?: string[] }, headerLine = 1): ColumnPlan {
  const index = (name: string, role: string): number => {
    const i = header.indexOf(name);
    if (i < 0) throw new DataFileError(file, headerLine, name, `${role} column not found; the header has ${header.map((h) => JSON.stringify(h)).join(', ')}`);
    return i;
  };
  const labelIndex = options.label !== undefined ? index(options.label, 'label') : null;
  for (const name of options.ignore ?? []) index(name, 'ignored');
  const featureNames = options.features ?? header.filter((h, i) => i !== labelIndex && !(options.ignore ?? []).includes(h));
  if (featureNames.length === 0) throw new DataFileError(file, headerLine, null, 'has no feature columns');
  const dup = featureNames.find((f, i) => featureNames.indexOf(f) !== i);
  if (dup !== undefined) throw new DataFileError(file, null, dup, 'feature listed twice');
  if (options.label !== undefined && featureNames.includes(options.label)) {
    throw new DataFileError(file, headerLine, options.label, 'is both the label and a feature');
  }
  return { featureNames, featureIndex: featureNames.map((f) => index(f, 'feature')), labelIndex, width: header.length };
}

/** Parses the picked fields of one row into out[offset..]; throws DataFileError at the first bad one. */
export function parseFeatures(fields: string[], line: number, plan: ColumnPlan, file: string, out: Float64Array, offset: number): void {
  if (fields.length !== plan.width) {
    throw new DataFileError(file, line, null, `has ${fields.length} field${fields.length === 1 ? '' : 's'}, the header has ${plan.width}`);
  }
  for (let j = 0; j < plan.featureIndex.length; j++) {
    const v = parseDecimal(fields[plan.featureIndex[j] as number] ?? '');
    if (typeof v === 'string') throw new DataFileError(file, line, plan.featureNames[j] as string, v);
    if (Math.abs(v) > MAX_FEATURE_MAGNITUDE) throw new DataFileError(file, line, plan.featureNames[j] as string, `is ${v}, beyond the accepted magnitude of ${MAX_FEATURE_MAGNITUDE}`);
    out[offset + j] = v;
  }
}

export interface LabelledCsv {
  featureNames: string[];
  x: Float64Array;
  rows: number;
  labels: string[];
  sha256: string;
}

/** Errors kept when a file has many bad rows; the count says how many there were in all. */
const MAX_REPORTED = 20;

export class DataFileErrors extends Error {
  constructor(
    readonly errors: DataFileError[],
    readonly total: number,
    hint = '',
  ) {
    super(`${total} bad row${total === 1 ? '' : 's'}:\n${errors.map((e) => `  ${e.message}`).join('\n')}${total > errors.length ? `\n  ... and ${total - errors.length} more` : ''}${hint ? `\n${hint}` : ''}`);
    this.name = 'DataFileErrors';
  }
}

/**
 * Reads a whole labelled CSV into memory for training. Every bad row is found and reported
 * (the first MAX_REPORTED in full) before anything is trained; none is silently dropped.
 */
export async function readLabelledCsv(path: string, options: { label: string; features?: string[]; ignore?: string[] }): Promise<LabelledCsv> {
  const csv: CsvSource = await openCsv(path);
  const plan = planColumns(csv.header, path, options, csv.headerLine);
  const d = plan.featureNames.length;
  let x = new Float64Array(1024 * d);
  const labels: string[] = [];
  const errors: DataFileError[] = [];
  const badByColumn = new Map<string, number>();
  let bad = 0;
  for await (const row of csv.rows) {
    const r = labels.length;
    if ((r + 1) * d > x.length) {
      const grown = new Float64Array(x.length * 2);
      grown.set(x);
      x = grown;
    }
    try {
      parseFeatures(row.fields, row.line, plan, path, x, r * d);
      const label = (row.fields[plan.labelIndex as number] ?? '').trim();
      if (label === '') throw new DataFileError(path, row.line, options.label, 'label is empty');
      labels.push(label);
    } catch (err) {
      if (!(err instanceof DataFileError)) throw err;
      bad++;
      if (err.column !== null) badByColumn.set(err.column, (badByColumn.get(err.column) ?? 0) + 1);
      if (errors.length < MAX_REPORTED) errors.push(err);
    }
  }
  if (bad > 0) {
    // A column that fails on every row is an id or a text column picked up by default.
    const whole = [...badByColumn].filter(([, n]) => n === labels.length + bad).map(([c]) => JSON.stringify(c));
    const hint = whole.length > 0 && !options.features ? `column ${whole.join(', ')} holds no numbers; name ${whole.length === 1 ? 'it' : 'them'} in --ignore, or list the feature columns with --features, to leave ${whole.length === 1 ? 'it' : 'them'} out` : '';
    throw new DataFileErrors(errors, bad, hint);
  }
  if (labels.length === 0) throw new DataFileError(path, null, null, 'has a header but no data rows');
  return { featureNames: plan.featureNames, x: x.slice(0, labels.length * d), rows: labels.length, labels, sha256: csv.sha256() };
}

/**
 * Reads the named feature columns of a whole CSV (other columns ignored), for calibration rows.
 * As for training, every bad row is reported and none is silently dropped.
 */
export async function readFeatureCsv(path: string, features: string[]): Promise<{ x: Float64Array; rows: number }> {
  const csv = await openCsv(path);
  const plan = planColumns(csv.header, path, { features }, csv.headerLine);
  const d = features.length;
  let x = new Float64Array(1024 * d);
  let rows = 0;
  const errors: DataFileError[] = [];
  let bad = 0;
  for await (const row of csv.rows) {
    if ((rows + 1) * d > x.length) {
      const grown = new Float64Array(x.length * 2);
      grown.set(x);
      x = grown;
    }
    try {
      parseFeatures(row.fields, row.line, plan, path, x, rows * d);
      rows++;
    } catch (err) {
      if (!(err instanceof DataFileError)) throw err;
      bad++;
      if (errors.length < MAX_REPORTED) errors.push(err);
    }
  }
  if (bad > 0) throw new DataFileErrors(errors, bad);
  if (rows === 0) throw new DataFileError(path, null, null, 'has a header but no data rows');
  return { x: x.slice(0, rows * d), rows };
}

/**
 * Class names in a stable order: numerically when every label is a number, else by code unit.
 * Returns the classes and each row's index into them.
 */
export function indexLabels(labels: string[], order?: readonly string[]): { classes: string[]; indices: Int32Array } {
  if (order) {
    // The classes in a given order (an imported network's output order): every label must be one.
    const at = new Map(order.map((c, i) => [c, i]));
    const unknown = [...new Set(labels.filter((l) => !at.has(l)))];
    if (unknown.length > 0) throw new LabelOrderError(unknown, order);
    return { classes: [...order], indices: Int32Array.from(labels, (l) => at.get(l) as number) };
  }
  const distinct = [...new Set(labels)];
  const numeric = distinct.every((l) => typeof parseDecimal(l) === 'number');
  distinct.sort(numeric ? (a, b) => Number(a) - Number(b) : (a, b) => (a < b ? -1 : a > b ? 1 : 0));
  const at = new Map(distinct.map((c, i) => [c, i]));
  return { classes: distinct, indices: Int32Array.from(labels, (l) => at.get(l) as number) };
}

/** Labels in the data that a given class list does not name. */
export class LabelOrderError extends Error {
  constructor(
    readonly unknown: string[],
    readonly order: readonly string[],
  ) {
    super(`the data holds label${unknown.length === 1 ? '' : 's'} ${unknown.slice(0, 5).map((u) => JSON.stringify(u)).join(', ')}${unknown.length > 5 ? ' ...' : ''}, not among the classes ${order.join(', ')}`);
    this.name = 'LabelOrderError';
  }
}
