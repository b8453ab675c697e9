/**
 * The label of each of rows vectors (rows x features, row-major). When `gap` is given, it also
 * writes, per row, how far the label `gap.of` leads: its score minus the largest score of any
 * other label (>= 0 where the label is `gap.of`, <= 0 where it is not), on any scale continuous
 * in x (probabilities, say); with `gap.of` -1, each row's own label's lead. The search then closes in on a change by interpolating the gaps
 * (fewer vectors than halving); without them it halves.
 */
export type LabelFunction = (x: Float64Array, rows: number, gap?: { of: number; into: Float64Array }) => Int32Array;

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
  /** Width the search narrows a crossing to, as a share of the feature's range. */
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
  /** The old label's lead at inner (>= 0) and at outer (<= 0); NaN when not known. */
  innerGap: number;
  outerGap: number;
  /** Which end the last step kept (Illinois: an end kept twice has its gap halved), or null. */
  kept: 'inner' | 'outer' | null;
  /** The last step interpolated and did not at least halve the bracket: the next one halves. */
  halveNext: boolean;
}

/** Scanned values per direction and feature in each batch of the scan (2 measured fastest on the demo bundle, against 1, 3, 4 and 8). */
const WAVE = 2;

interface Side {
  feature: number;
  /** The grid values beyond x on this side, nearest first. */
  values: number[];
  /** How many of them are scanned. */
  next: number;
  /** The last scanned value with the old label (x itself at first). */
  inner: number;
  /** The old label's lead there. */
  innerGap: number;
  done: boolean;
  found: Bracket | null;
}

/**
 * For each feature alone, the smallest change of x within [low_j, high_j] at which `labelOf`
 * gives another label than it gives x. Each feature's range holds a grid of cells + 1 evenly
 * spaced values; from x outwards, in each direction, the first grid value with another label
 * brackets the change with the value before it (or x itself), and the bracket is narrowed
 * (probesOf: interpolation of the label's lead where the label function gives it, else halving)
 * until it is narrower than tolerance x (high - low). The grid is scanned outwards two values per
 * direction at a time, every feature together, and a direction stops at its first change (or,
 * the other direction having found a nearer one, where it can no longer be nearer): the same
 * brackets as scanning the whole grid, with fewer vectors. A feature's brackets are narrowed in
 * the same batches as the scan of the others, so that each batch is one call of labelOf. A label region narrower than a cell,
 * between two grid values of the old label, is not seen. A change that falls outside
 * [low, high] (x itself outside, and the label changing before the range is reached) is not
 * reported: the nearest change inside the range is then not a boundary of the old label.
 * Features without a change are left out; the rest are returned in feature order.
 */
export function nearestChanges(x: ArrayLike<number>, low: ArrayLike<number>, high: ArrayLike<number>, labelOf: LabelFunction, options: NearestChangeOptions = DEFAULT_NEAREST_CHANGE): NearestChange[] {
  const d = x.length;
  const base = Float64Array.from(x);
  const gaps = new GapBuffer();
  // x's own label, and how far it leads there.
  const old = labelRows(base, [0], [base[0] as number], labelOf, -1, gaps)[0] as number;
  const baseGap = gaps.at(0);
  const sides: Side[] = [];
  for (let j = 0; j < d; j++) {
    const lo = low[j] as number;
    const hi = high[j] as number;
    if (!(hi > lo)) continue;
    const xj = base[j] as number;
    const grid: number[] = [];
    for (let i = 0; i <= options.cells; i++) grid.push(i === options.cells ? hi : lo + ((hi - lo) * i) / options.cells);
    sides.push({ feature: j, values: grid.filter((v) => v > xj), next: 0, inner: xj, innerGap: baseGap, done: false, found: null });
    sides.push({ feature: j, values: grid.filter((v) => v < xj).reverse(), next: 0, inner: xj, innerGap: baseGap, done: false, found: null });
  }
  const other = (i: number): Side => sides[i ^ 1] as Side;
  const brackets: Bracket[] = [];
  const settled = new Uint8Array(sides.length / 2);
  const widthOf = (b: Bracket): number => options.tolerance * ((high[b.feature] as number) - (low[b.feature] as number));
  // Brackets still being narrowed. A feature's brackets are narrowed as soon as both its sides
  // have stopped, in the same batches as the scan of the features still going.
  let narrowing: Bracket[] = [];
  for (;;) {
    // A side stops once the other side of its feature found a change nearer than anything left here.
    sides.forEach((side, i) => {
      const o = other(i).found;
      if (!side.done && (side.next >= side.values.length || (o && Math.abs(side.inner - (base[side.feature] as number)) >= Math.abs(o.outer - (base[side.feature] as number))))) side.done = true;
    });
    for (let i = 0; i < sides.length; i += 2) {
      if (settled[i / 2] || !(sides[i] as Side).done || !(sides[i + 1] as Side).done) continue;
      settled[i / 2] = 1;
      const xj = base[(sides[i] as Side).feature] as number;
      const found = [(sides[i] as Side).found, (sides[i + 1] as Side).found].filter((b): b is Bracket => b !== null);
      // Only a bracket that may hold the nearer change is narrowed.
      found.sort((a, b) => Math.abs(a.inner - xj) - Math.abs(b.inner - xj));
      const near = found[0];
      if (!near) continue;
      const far = found[1];
      for (const b of far && Math.abs(far.inner - xj) < Math.abs(near.outer - xj) ? [near, far] : [near]) {
        brackets.push(b);
        if (!narrowEnough(b, widthOf(b))) narrowing.push(b);
      }
    }
    const open = sides.filter((side) => !side.done);
    if (open.length === 0 && narrowing.length === 0) break;
    const features: number[] = [];
    const values: number[] = [];
    for (const side of open) {
      for (let k = side.next; k < Math.min(side.next + WAVE, side.values.length); k++) {
        features.push(side.feature);
        values.push(side.values[k] as number);
      }
    }
    const scanned = features.length;
    const probes = narrowing.map((b) => {
      const points = probesOf(b, widthOf(b));
      for (const v of points) {
        features.push(b.feature);
        values.push(v);
      }
      return points;
    });
    const labels = labelRows(base, features, values, labelOf, old, gaps);
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
          if (!((side.inner < lo && v <= lo) || (side.inner > hi && v >= hi))) {
            side.found = { feature: j, inner: side.inner, outer: v, label: labels[at] as number, innerGap: side.innerGap, outerGap: gaps.at(at), kept: null, halveNext: false };
          }
          side.done = true;
        } else {
          side.inner = v;
          side.innerGap = gaps.at(at);
        }
      }
      side.next = end;
    }
    at = scanned;
    narrowing.forEach((b, i) => {
      at = narrowStep(b, probes[i] as number[], old, labels, gaps, at);
    });
    narrowing = narrowing.filter((b) => !narrowEnough(b, widthOf(b)));
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

/** Whether a bracket is narrower than width, or float64 can halve it no further. */
function narrowEnough(b: Bracket, width: number): boolean {
  const mid = b.inner + (b.outer - b.inner) / 2;
  return Math.abs(b.outer - b.inner) <= width || mid === b.inner || mid === b.outer;
}

/**
 * The values one narrowing step labels in a bracket. Where the gaps are known, the step
 * interpolates them to where the old label's lead reaches 0 (regula falsi, with the Illinois
 * modification: the gap of an end kept twice in a row is halved, so that the far end moves too;
 * Dowell & Jarratt 1971, BIT 11) and labels two values a quarter of the width either side of that
 * point: once the estimate is that close, they straddle the change and the bracket is done. A step
 * that did not at least halve the bracket is followed by a halving one, so no bracket takes more
 * than about twice the steps of bisection. Without gaps, it halves.
 */
function probesOf(b: Bracket, width: number): number[] {
  const span = b.outer - b.inner;
  const points: number[] = [];
  if (!b.halveNext && b.innerGap > 0 && b.outerGap < 0) {
    const s = b.innerGap / (b.innerGap - b.outerGap);
    const e = (0.25 * width) / Math.abs(span);
    for (const at of [s - e, s + e]) if (at > 0 && at < 1) points.push(b.inner + span * at);
  }
  if (points.length === 0) points.push(b.inner + span / 2);
  return points;
}

/**
 * Moves a bracket's ends to the labelled probes (from labels[at] on) and returns the index after
 * them. Labels, not gaps, decide which end moves: the old label stays at inner and another one at
 * outer throughout.
 */
function narrowStep(b: Bracket, probes: readonly number[], old: number, labels: Int32Array, gaps: GapBuffer, at: number): number {
  const before = Math.abs(b.outer - b.inner);
  const interpolated = !b.halveNext && b.innerGap > 0 && b.outerGap < 0;
  let movedInner = false;
  let movedOuter = false;
  for (const v of probes) {
    const l = labels[at] as number;
    const g = gaps.at(at++);
    if (movedOuter) continue;
    if (l === old) {
      b.inner = v;
      b.innerGap = g;
      movedInner = true;
    } else {
      b.outer = v;
      b.outerGap = g;
      b.label = l;
      movedOuter = true;
    }
  }
  const kept = movedInner && movedOuter ? null : movedInner ? 'outer' : 'inner';
  if (kept !== null && kept === b.kept) {
    if (kept === 'outer') b.outerGap /= 2;
    else b.innerGap /= 2;
  }
  b.kept = kept;
  b.halveNext = interpolated && Math.abs(b.outer - b.inner) > before / 2;
  return at;
}

/** The gaps of the last labelRows call, grown as needed; NaN where the label function gave none. */
class GapBuffer {
  buffer = new Float64Array(64);
  at(i: number): number {
    return this.buffer[i] as number;
  }
}

/** x with one feature changed per row, labelled in one call, with the old label's lead per row. */
function labelRows(base: Float64Array, features: readonly number[], values: readonly number[], labelOf: LabelFunction, old: number, gaps: GapBuffer): Int32Array {
  if (features.length === 0) return new Int32Array(0);
  const d = base.length;
  const rows = new Float64Array(features.length * d);
  for (let r = 0; r < features.length; r++) {
    rows.set(base, r * d);
    rows[r * d + (features[r] as number)] = values[r] as number;
  }
  if (gaps.buffer.length < features.length) gaps.buffer = new Float64Array(2 * features.length);
  gaps.buffer.fill(Number.NaN, 0, features.length);
  return labelOf(rows, features.length, { of: old, into: gaps.buffer });
}
