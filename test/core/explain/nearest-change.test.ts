import { describe, expect, it } from 'vitest';
import { nearestChanges } from '../../../src/core/explain/nearest-change.js';

// Labels given by known boundaries, so that the nearest change of each feature is known in closed form.
/** 0 when x0 + 2 x1 < 10, else 1; and 2 wherever x2 > 7. */
const labelOf = (x: Float64Array, rows: number): Int32Array => {
  const out = new Int32Array(rows);
  for (let r = 0; r < rows; r++) {
    const a = x[r * 3] as number;
    const b = x[r * 3 + 1] as number;
    const c = x[r * 3 + 2] as number;
    out[r] = c > 7 ? 2 : a + 2 * b < 10 ? 0 : 1;
  }
  return out;
};

describe('nearestChanges', () => {
  it('finds each feature\'s boundary to 1e-6 of its range, with the new label', () => {
    const low = [0, 0, 0];
    const high = [20, 10, 10];
    const out = nearestChanges([4, 2, 1], low, high, labelOf);
    // x0 + 4 = 10 at x0 = 6; 4 + 2 x1 = 10 at x1 = 3; x2 = 7 gives label 2.
    expect(out.map((c) => c.feature)).toEqual([0, 1, 2]);
    const [a, b, c] = out as [(typeof out)[0], (typeof out)[0], (typeof out)[0]];
    expect(a.label).toBe(1);
    expect(a.to).toBeGreaterThanOrEqual(6);
    expect(a.to - 6).toBeLessThanOrEqual(1e-6 * 20);
    expect(b.to).toBeGreaterThanOrEqual(3);
    expect(b.to - 3).toBeLessThanOrEqual(1e-6 * 10);
    expect(c.label).toBe(2);
    expect(c.to).toBeGreaterThan(7);
    expect(c.to - 7).toBeLessThanOrEqual(1e-6 * 10);
  });

  it('goes the nearer way and leaves out a feature whose range holds no change', () => {
    // From x0 = 7, x1 = 2 (label 1): the boundary is at 6, below, and nothing changes above.
    const out = nearestChanges([7, 2, 2], [0, 1.6, 0], [20, 10, 10], labelOf);
    const f0 = out.find((c) => c.feature === 0);
    expect(f0?.to).toBeLessThan(6 + 1e-9);
    expect(f0?.to).toBeGreaterThan(6 - 20e-6);
    expect(f0?.label).toBe(0);
    // x1 in [1.6, 10] keeps 7 + 2 x1 >= 10.2: label 1 throughout; x1 changes nothing.
    expect(out.find((c) => c.feature === 1)).toBeUndefined();
  });

  it('does not report a change that happens before an outside value reaches the range', () => {
    // x0 = -30 is below the range [0, 20] and labelled 0; the boundary at 6 lies inside: reported.
    expect(nearestChanges([-30, 2, 1], [0, 0, 0], [20, 10, 10], labelOf).find((c) => c.feature === 0)?.to).toBeCloseTo(6, 4);
    // x0 = 30 above the range, labelled 1; the label is 0 from 6 down, a change inside the range
    // but x0's label changes only at 6, which the scan reaches from above: reported at 6.
    expect(nearestChanges([30, 2, 1], [0, 0, 0], [20, 10, 10], labelOf).find((c) => c.feature === 0)?.to).toBeCloseTo(6, 4);
    // x2 = 9 above the range [0, 5] is labelled 2, which changes at 7, before the range: left out.
    expect(nearestChanges([4, 2, 9], [0, 0, 0], [20, 10, 5], labelOf).find((c) => c.feature === 2)).toBeUndefined();
  });

  it('closes in on a change with fewer vectors where the label function gives the leads, to the same tolerance', () => {
    // Scores of a softmax over three affine logits; the label is the first largest. The boundary
    // between labels 0 and 1 along x0 (x1 = 2, x2 = 1) is where 0.7 x0 = 3 - 0.2 x0, x0 = 10/3.
    const score = (x: Float64Array, r: number): number[] => {
      const a = x[r * 3] as number;
      const b = x[r * 3 + 1] as number;
      const z = [3 - 0.2 * a + 0.1 * b, 0.7 * a + 0.1 * b, -2 + 0.3 * (x[r * 3 + 2] as number)];
      const m = Math.max(...z);
      const e = z.map((v) => Math.exp(v - m));
      const s = e.reduce((p, q) => p + q, 0);
      return e.map((v) => v / s);
    };
    const count = { plain: 0, leads: 0 };
    const plain = (x: Float64Array, rows: number): Int32Array => {
      count.plain += rows;
      return Int32Array.from({ length: rows }, (_, r) => {
        const p = score(x, r);
        return p.indexOf(Math.max(...p));
      });
    };
    const withLeads = (x: Float64Array, rows: number, gap?: { of: number; into: Float64Array }): Int32Array => {
      count.leads += rows;
      return Int32Array.from({ length: rows }, (_, r) => {
        const p = score(x, r);
        const label = p.indexOf(Math.max(...p));
        if (gap) {
          const of = gap.of < 0 ? label : gap.of;
          gap.into[r] = (p[of] as number) - Math.max(...p.filter((_, k) => k !== of));
        }
        return label;
      });
    };
    const low = [0, 0, 0];
    const high = [20, 10, 10];
    const a = nearestChanges([1, 2, 1], low, high, plain).find((c) => c.feature === 0);
    const b = nearestChanges([1, 2, 1], low, high, withLeads).find((c) => c.feature === 0);
    for (const c of [a, b]) {
      expect(c?.label).toBe(1);
      expect(c?.to).toBeGreaterThanOrEqual(10 / 3);
      expect((c?.to as number) - 10 / 3).toBeLessThanOrEqual(1e-6 * 20);
    }
    expect(count.leads).toBeLessThan(count.plain);
  });
});
