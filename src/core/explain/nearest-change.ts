/** The label of each of rows vectors (rows x features, row-major). */
export type LabelFunction = (x: Float64Array, rows: number) => Int32Array;

export interface NearestChange {
  feature: number;
  from: number;
  /** The first value, going from `from`, at which the label is no longer the old one. */
  to: number;
  /** The label at `to`. */
  label: number;
}

export interface NearestChangeOptions {
  /** Cells of the scan across each feature's range [low, high]. */
  cells: number;
  /** Width the bisection narrows a crossing to, as a share of the feature's range. */
  tolerance: number;
}

export const DEFAULT_NEAREST_CHANGE: NearestChangeOptions = { cells: 16, tolerance: 1e-6 };

interface Bracket {
  feature: number;
  /** Nearer to x: the old label. */
  inner: number;
  /** Further: another label. */
  outer: number;
  label: number;
}

/** Scanned values per direction and feature in each batch of the scan. */
const WAVE = 4;

interface Side {
  feature: number;
  /** The grid values beyond x on this side, nearest first. */
  values: number[];
  /** How many of them are scanned. */
  next: number;
  /** The last scanned value with the old label (x itself at first). */
  inner: number;
  done: boolean;
  found: Bracket | null;
}

/**
 * For each feature alone, the smallest change of x within [low_j, high_j] at which `labelOf`
 * gives another label than it gives x. Each feature's range holds a grid of cells + 1 evenly
 * spaced values; from x outwards, in each direction, the first grid value with another label
 * brackets the change with the value before it (or x itself), and the bracket is bisected until
 * it is narrower than tolerance x (high - low). The grid is scanned outwards in batches of a few
 * values per direction, every feature together, and a direction stops at its first change (or,
 * the other direction having found a nearer one, where it can no longer be nearer): the same
 * brackets as scanning the whole grid, with fewer vectors. A label region narrower than a cell,
 * between two grid values of the old label, is not seen. A change that falls outside
 * [low, high] (x itself outside, and the label changing before the range is reached) is not
 * reported: the nearest change inside the range is then not a boundary of the old label.
 * Features without a change are left out; the rest are returned in feature order.
 */
export function nearestChanges(x: ArrayLike<number>, low: ArrayLike<number>, high: ArrayLike<number>, labelOf: LabelFunction, options: NearestChangeOptions = DEFAULT_NEAREST_CHANGE): NearestChange[] {
  const d = x.length;
  const base = Float64Array.from(x);
  const old = labelOf(base, 1)[0] as number;
  const sides: Side[] = [];
  for (let j = 0; j < d; j++) {
    const lo = low[j] as number;
    const hi = high[j] as number;
    if (!(hi > lo)) continue;
    const xj = base[j] as number;
    const grid: number[] = [];
    for (let i = 0; i <= options.cells; i++) grid.push(i === options.cells ? hi : lo + ((hi - lo) * i) / options.cells);
    sides.push({ feature: j, values: grid.filter((v) => v > xj), next: 0, inner: xj, done: false, found: null });
    sides.push({ feature: j, values: grid.filter((v) => v < xj).reverse(), next: 0, inner: xj, done: false, found: null });
  }
  const other = (i: number): Side => sides[i ^ 1] as Side;
  for (;;) {
    // A side stops once the other side of its feature found a change nearer than anything left here.
    sides.forEach((side, i) => {
      const o = other(i).found;
      if (!side.done && (side.next >= side.values.length || (o && Math.abs(side.inner - (base[side.feature] as number)) >= Math.abs(o.outer - (base[side.feature] as number))))) side.done = true;
    });
    const open = sides.filter((side) => !side.done);
    if (open.length === 0) break;
    const features: number[] = [];
    const values: number[] = [];
    for (const side of open) {
      for (let k = side.next; k < Math.min(side.next + WAVE, side.values.length); k++) {
        features.push(side.feature);
        values.push(side.values[k] as number);
      }
    }
    const labels = labelRows(base, features, values, labelOf);
    let at = 0;
    for (const side of open) {
      const j = side.feature;
      const lo = low[j] as number;
      const hi = high[j] as number;
      const end = Math.min(side.next + WAVE, side.values.length);
      for (let k = side.next; k < end; k++, at++) {
        if (side.done) continue;
        const v = side.values[k] as number;
        if (labels[at] !== old) {
          // Entirely outside the range: the label changed before the range was reached.
          if (!((side.inner < lo && v <= lo) || (side.inner > hi && v >= hi))) side.found = { feature: j, inner: side.inner, outer: v, label: labels[at] as number };
          side.done = true;
        } else side.inner = v;
      }
      side.next = end;
    }
  }
  const brackets: Bracket[] = [];
  for (let i = 0; i < sides.length; i += 2) {
    const xj = base[(sides[i] as Side).feature] as number;
    const found = [sides[i]?.found, sides[i + 1]?.found].filter((b): b is Bracket => b !== null && b !== undefined);
    // Only a bracket that may hold the nearer change is bisected.
    found.sort((a, b) => Math.abs(a.inner - xj) - Math.abs(b.inner - xj));
    const near = found[0];
    if (!near) continue;
    brackets.push(near);
    const far = found[1];
    if (far && Math.abs(far.inner - xj) < Math.abs(near.outer - xj)) brackets.push(far);
  }
  // Bisection, every open bracket in one batch per step.
  let open = brackets.filter((b) => Math.abs(b.outer - b.inner) > options.tolerance * ((high[b.feature] as number) - (low[b.feature] as number)));
  while (open.length > 0) {
    const mids = open.map((b) => b.inner + (b.outer - b.inner) / 2);
    const at = labelRows(base, open.map((b) => b.feature), mids, labelOf);
    open.forEach((b, i) => {
      const mid = mids[i] as number;
      const l = at[i] as number;
      if (l === old) b.inner = mid;
      else {
        b.outer = mid;
        b.label = l;
      }
    });
    open = open.filter((b) => {
      const width = Math.abs(b.outer - b.inner);
      // A midpoint equal to an end: float64 can halve no further.
      return width > options.tolerance * ((high[b.feature] as number) - (low[b.feature] as number)) && b.inner + (b.outer - b.inner) / 2 !== b.inner && b.inner + (b.outer - b.inner) / 2 !== b.outer;
    });
  }
  const out: NearestChange[] = [];
  for (let j = 0; j < d; j++) {
    const candidates = brackets.filter((b) => b.feature === j && b.outer >= (low[j] as number) && b.outer <= (high[j] as number));
    candidates.sort((a, b) => Math.abs(a.outer - (base[j] as number)) - Math.abs(b.outer - (base[j] as number)));
    const best = candidates[0];
    if (best) out.push({ feature: j, from: base[j] as number, to: best.outer, label: best.label });
  }
  return out;
}

/** x with one feature changed per row, labelled in one call. */
function labelRows(base: Float64Array, features: readonly number[], values: readonly number[], labelOf: LabelFunction): Int32Array {
  if (features.length === 0) return new Int32Array(0);
  const d = base.length;
  const rows = new Float64Array(features.length * d);
  for (let r = 0; r < features.length; r++) {
    rows.set(base, r * d);
    rows[r * d + (features[r] as number)] = values[r] as number;
  }
  return labelOf(rows, features.length);
}
