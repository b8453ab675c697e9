import { describe, expect, it } from 'vitest';
import { makeProbes } from '../../../src/core/domain/probes.js';
import { createRng } from '../../../src/core/rng.js';

const input = {
  heldOut: Float64Array.of(1, 10, 2, 20, 3, 30),
  heldOutRows: 3,
  dim: 2,
  rangeLow: [0, 10],
  rangeHigh: [4, 30],
  envelopeLow: [-0.4, 8],
  envelopeHigh: [4.4, 32],
  rowsPerProbe: 50,
};
const probes = makeProbes(input, createRng(1));
const byName = Object.fromEntries(probes.map((p) => [p.name, p]));
// centre (2, 20), half-range (2, 10)
const reach = (x: Float64Array, i: number) => Math.max(Math.abs(x[i * 2]! - 2) / 2, Math.abs(x[i * 2 + 1]! - 20) / 10);

describe('out-of-domain probes', () => {
  it('place scaled_Nx points exactly N half-ranges from the centre along their largest coordinate', () => {
    for (const t of [2, 10, 100]) {
      const p = byName[`scaled_${t}x`]!;
      expect(p.rows).toBe(50);
      for (let i = 0; i < p.rows; i++) expect(reach(p.x, i)).toBeCloseTo(t, 10);
    }
  });

  it('move one feature of a held-out row half a range beyond the range, leaving the other as it was', () => {
    const p = byName.one_feature_out!;
    for (let i = 0; i < p.rows; i++) {
      const held = input.heldOut.subarray((i % 3) * 2, (i % 3) * 2 + 2);
      const moved = [0, 1].filter((j) => p.x[i * 2 + j] !== held[j]);
      expect(moved).toHaveLength(1);
      const j = moved[0]!;
      expect([input.rangeLow[j]! - (j === 0 ? 2 : 10), input.rangeHigh[j]! + (j === 0 ? 2 : 10)]).toContain(p.x[i * 2 + j]);
    }
  });

  it('zero only features whose envelope excludes 0', () => {
    const p = byName.stuck_at_zero!;
    for (let i = 0; i < p.rows; i++) {
      expect(p.x[i * 2]).not.toBe(0); // feature 0's envelope holds 0
      expect(p.x[i * 2 + 1]).toBe(0);
    }
  });

  it('draw the uniform box within twice the range', () => {
    const p = byName.uniform_box_2x!;
    for (let i = 0; i < p.rows; i++) expect(reach(p.x, i)).toBeLessThanOrEqual(2);
  });
});
