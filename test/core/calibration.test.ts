import { describe, expect, it } from 'vitest';
import { fitTemperature, meanNll } from '../../src/core/calibration.js';
import { expectedCalibrationError } from '../../src/core/metrics.js';
import { softmaxRowsInto } from '../../src/core/softmax.js';
import reference from '../fixtures/core-reference.json' with { type: 'json' };

const flat = (rows: number[][]): Float64Array => Float64Array.from(rows.flat());

// Reference values from scipy.optimize.minimize_scalar (bounded, xatol 1e-12) and a numpy ECE
// with 15 equal-width bins, made by test/fixtures/make-core-fixtures.py.
describe('temperature scaling (Guo et al. 2017)', () => {
  reference.temperature.forEach((c, i) => {
    it(`finds the NLL-minimising temperature scipy finds, case ${i + 1} (T = ${c.temperature.toFixed(4)})`, () => {
      const z = flat(c.logits);
      const rows = c.labels.length;
      const t = fitTemperature(z, rows, c.classes, c.labels);
      expect(t).toBeCloseTo(c.temperature, 6);
      expect(meanNll(z, rows, c.classes, c.labels, t)).toBeCloseTo(c.nll_at_temperature, 10);
      expect(meanNll(z, rows, c.classes, c.labels, 1)).toBeCloseTo(c.nll_at_1, 12);
    });
  });

  it('clamps the temperature when the held-out rows are separable', () => {
    // Every row right with a growing margin: the NLL keeps falling as T -> 0.
    const z = Float64Array.of(5, 0, 0, 5, 4, 0);
    expect(fitTemperature(z, 3, 2, [0, 1, 0])).toBe(0.01);
  });
});

describe('temperature scaling on logits that carry no information', () => {
  it('leaves T at 1 when every row has equal logits, since the NLL does not depend on T', () => {
    expect(fitTemperature(Float64Array.of(2, 2, 2, -1, -1, -1), 2, 3, [0, 2])).toBe(1);
  });
});

describe('expected calibration error', () => {
  reference.temperature.forEach((c, i) => {
    it(`matches the numpy reference before and after scaling, case ${i + 1}`, () => {
      const z = flat(c.logits);
      const rows = c.labels.length;
      const p = new Float64Array(z.length);
      softmaxRowsInto(z, rows, c.classes, 1, p);
      expect(expectedCalibrationError(p, rows, c.classes, c.labels, 15)).toBeCloseTo(c.ece_at_1, 12);
      softmaxRowsInto(z, rows, c.classes, c.temperature, p);
      expect(expectedCalibrationError(p, rows, c.classes, c.labels, 15)).toBeCloseTo(c.ece_at_temperature, 8);
    });
  });

  it('follows the definition on a case worked by hand', () => {
    // Four rows, two classes. Confidences 0.9 (right), 0.9 (wrong), 0.6 (right), 0.55 (right).
    // Bins of width 1/15: 0.9 -> bin 13 (0.8667, 0.9333]; 0.6 -> bin 8 (0.5333, 0.6]; 0.55 -> bin 8.
    // bin 13: |acc 0.5 - conf 0.9| * 2/4 = 0.2; bin 8: |1 - 0.575| * 2/4 = 0.2125. ECE = 0.4125.
    const p = Float64Array.of(0.9, 0.1, 0.1, 0.9, 0.6, 0.4, 0.45, 0.55);
    expect(expectedCalibrationError(p, 4, 2, [0, 0, 0, 1], 15)).toBeCloseTo(0.4125, 14);
  });
});
