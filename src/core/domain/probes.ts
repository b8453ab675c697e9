import type { Rng } from '../rng.js';

/** A family of generated out-of-domain rows, in raw units, row-major. */
export interface ProbeSet {
  name: string;
  description: string;
  rows: number;
  x: Float64Array;
}

export interface ProbeInput {
  /** Held-out in-domain rows, raw units. */
  heldOut: Float64Array;
  heldOutRows: number;
  dim: number;
  /** Per feature, the training 0.1% and 99.9% quantiles: the range the probes are placed from. */
  rangeLow: ArrayLike<number>;
  rangeHigh: ArrayLike<number>;
  /** Per feature, the envelope bounds, to pick the features for which 0 is out of domain. */
  envelopeLow: ArrayLike<number>;
  envelopeHigh: ArrayLike<number>;
  rowsPerProbe: number;
}

/**
 * Out-of-domain test points for the bundle-time evaluation, placed around the training range
 * (centre c_j and half-range h_j of each feature's 0.1%-99.9% quantiles):
 * - scaled_Nx: c + N h u with u a random direction scaled so that max |u_j| = 1, so every point
 *   lies N times as far from the centre as the range's edge along its largest coordinate;
 * - one_feature_out: a held-out row with one random feature moved half a range beyond its range;
 * - stuck_at_zero: a held-out row with one feature reading 0, for features whose envelope
 *   excludes 0 (a sensor failed to zero);
 * - uniform_box_2x: uniform in the box of twice the range; some of these land among the data.
 */
export function makeProbes(input: ProbeInput, rng: Rng): ProbeSet[] {
  const { dim, rowsPerProbe: n } = input;
  const c = Float64Array.from({ length: dim }, (_, j) => ((input.rangeLow[j] as number) + (input.rangeHigh[j] as number)) / 2);
  const h = Float64Array.from({ length: dim }, (_, j) => Math.max(((input.rangeHigh[j] as number) - (input.rangeLow[j] as number)) / 2, 1e-9 * Math.max(1, Math.abs(c[j] as number))));
  const heldRow = (i: number): Float64Array => {
    const r = i % input.heldOutRows;
    return input.heldOut.slice(r * dim, r * dim + dim);
  };
  const out: ProbeSet[] = [];

  for (const t of [2, 10, 100]) {
    const x = new Float64Array(n * dim);
    for (let i = 0; i < n; i++) {
      const u = Float64Array.from({ length: dim }, () => rng.normal());
      const m = Math.max(...Array.from(u, Math.abs)) || 1;
      for (let j = 0; j < dim; j++) x[i * dim + j] = (c[j] as number) + (t * (h[j] as number) * (u[j] as number)) / m;
    }
    out.push({ name: `scaled_${t}x`, description: `${t} times the training range from its centre, in a random direction`, rows: n, x });
  }

  if (input.heldOutRows > 0) {
    const x = new Float64Array(n * dim);
    for (let i = 0; i < n; i++) {
      const row = heldRow(i);
      const j = rng.int(dim);
      row[j] = rng.next() < 0.5 ? (input.rangeLow[j] as number) - (h[j] as number) : (input.rangeHigh[j] as number) + (h[j] as number);
      x.set(row, i * dim);
    }
    out.push({ name: 'one_feature_out', description: 'a held-out row with one feature half a range beyond the training range', rows: n, x });

    const zeroable = Array.from({ length: dim }, (_, j) => j).filter((j) => (input.envelopeLow[j] as number) > 0 || (input.envelopeHigh[j] as number) < 0);
    if (zeroable.length > 0) {
      const z = new Float64Array(n * dim);
      for (let i = 0; i < n; i++) {
        const row = heldRow(i);
        row[zeroable[rng.int(zeroable.length)] as number] = 0;
        z.set(row, i * dim);
      }
      out.push({ name: 'stuck_at_zero', description: 'a held-out row with one feature reading 0, where 0 is outside its envelope', rows: n, x: z });
    }
  }

  const box = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) for (let j = 0; j < dim; j++) box[i * dim + j] = (c[j] as number) + 2 * (h[j] as number) * (2 * rng.next() - 1);
  out.push({ name: 'uniform_box_2x', description: 'uniform in the box of twice the training range; some points fall among the data', rows: n, x: box });
  return out;
}
