import { describe, expect, it } from 'vitest';
import { fitStandardizer, standardize } from '../../src/core/standardize.js';

describe('standardisation', () => {
  it('subtracts the mean and divides by the population standard deviation of each column', () => {
    // column 0: 1, 3 -> mean 2, std 1; column 1: 10, 30 -> mean 20, std 10
    const st = fitStandardizer(Float64Array.of(1, 10, 3, 30), 2, 2);
    expect(st).toEqual({ mean: [2, 20], scale: [1, 10] });
    expect(Array.from(standardize(st, Float64Array.of(4, 0), 1))).toEqual([2, -2]);
  });

  it('gives a constant column scale 1, so that it standardises to 0 instead of NaN (the StandardScaler convention)', () => {
    const st = fitStandardizer(Float64Array.of(5, 1, 5, 2, 5, 3), 3, 2);
    expect(st.scale[0]).toBe(1);
    expect(Array.from(standardize(st, Float64Array.of(5, 2), 1))).toEqual([0, 0]);
  });
});
