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

/**
 * For each feature alone, the smallest change of x within [low_j, high_j] at which `labelOf`
 * gives another label than it gives x. Each feature's range is scanned at cells + 1 evenly spaced
 * values, every feature in one batch; in each direction the first scanned value with another
 * label brackets the change with the value before it (or x itself), and the bracket is bisected,
 * all features together, until it is narrower than tolerance x (high - low). A label region
 * narrower than a scan cell that lies between two scanned values of the old label is not seen.
 * A change that falls outside [low, high] (x itself outside, and the label changing before the
 * range is reached) is not reported: the feature's nearest change inside the range is then not
 * a boundary of the old label. Features without a change are left out; the rest are returned in
 * feature order.
 */
export function nearestChanges(x: ArrayLike<number>, low: ArrayLike<number>, high: ArrayLike<number>, labelOf: LabelFunction, options: NearestChangeOptions = DEFAULT_NEAREST_CHANGE): NearestChange[] {
  const d = x.length;
  const base = Float64Array.from(x);
  const old = labelOf(base, 1)[0] as number;
  // The scan: every feature's grid, ascending, one batch; feature j's values at [first[j], first[j + 1]).
  const features: number[] = [];
  const values: number[] = [];
  const first = new Int32Array(d + 1);
  for (let j = 0; j < d; j++) {
    first[j] = values.length;
    const lo = low[j] as number;
    const hi = high[j] as number;
    if (!(hi > lo)) continue;
    for (let i = 0; i <= options.cells; i++) {
      const v = i === options.cells ? hi : lo + ((hi - lo) * i) / options.cells;
      if (v === base[j]) continue;
      features.push(j);
      values.push(v);
    }
  }
  first[d] = values.length;
  const labels = labelRows(base, features, values, labelOf);
  const brackets: Bracket[] = [];
  const found: Bracket[] = [];
  for (let j = 0; j < d; j++) {
    const xj = base[j] as number;
    const lo = low[j] as number;
    const hi = high[j] as number;
    found.length = 0;
    // Up from x, then down from x.
    for (const dir of [1, -1]) {
      let inner = xj;
      const end = first[j + 1] as number;
      const start = first[j] as number;
      for (let i = dir > 0 ? start : end - 1; i >= start && i < end; i += dir) {
        const v = values[i] as number;
        if (dir > 0 ? v <= xj : v >= xj) continue;
        if (labels[i] !== old) {
          // Entirely outside the range: the label changed before the range was reached.
          if (!((inner < lo && v <= lo) || (inner > hi && v >= hi))) found.push({ feature: j, inner, outer: v, label: labels[i] as number });
          break;
        }
        inner = v;
      }
    }
    // Only a bracket that may hold the nearer change is bisected.
    found.sort((a, b) => Math.abs(a.inner - xj) - Math.abs(b.inner - xj));
    const near = found[0];
    if (!near) continue;
    brackets.push(near);
    const other = found[1];
    if (other && Math.abs(other.inner - xj) < Math.abs(near.outer - xj)) brackets.push(other);
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
