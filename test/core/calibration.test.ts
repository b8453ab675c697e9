import { describe, expect, it } from 'vitest';
import { ensembleMeanNll, fitEnsembleTemperature, fitTemperature, meanNll } from '../../src/core/calibration.js';
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
      const { temperature: t, fit } = fitTemperature(z, rows, c.classes, c.labels);
      expect(fit).toBe('fitted');
      expect(t).toBeCloseTo(c.temperature, 6);
      expect(meanNll(z, rows, c.classes, c.labels, t)).toBeCloseTo(c.nll_at_temperature, 10);
      expect(meanNll(z, rows, c.classes, c.labels, 1)).toBeCloseTo(c.nll_at_1, 12);
    });
  });

  it('does not sharpen when the held-out rows are separable: T stays 1 and the fit says why', () => {
    // Every row right: the NLL keeps falling as T -> 0, so a minimiser would make every answer certain.
    const z = Float64Array.of(5, 0, 0, 5, 4, 0);
    const nll = (t: number): number => meanNll(z, 3, 2, [0, 1, 0], t);
    expect(nll(0.5)).toBeLessThan(nll(1));
    expect(nll(1)).toBeLessThan(nll(2));
    expect(fitTemperature(z, 3, 2, [0, 1, 0])).toEqual({ temperature: 1, fit: 'separable' });
  });

  it('fits an interior minimum as soon as one row is wrong, where the NLL turns up again', () => {
    const z = Float64Array.of(5, 0, 0, 5, 4, 0, 0, 1);
    const { temperature, fit } = fitTemperature(z, 4, 2, [0, 1, 0, 0]);
    expect(fit).toBe('fitted');
    const nll = (t: number): number => meanNll(z, 4, 2, [0, 1, 0, 0], t);
    expect(nll(temperature)).toBeLessThan(nll(temperature * 1.01));
    expect(nll(temperature)).toBeLessThan(nll(temperature / 1.01));
  });
});

describe('the temperature of an ensemble, calibrated after pooling (Rahaman & Thiery 2021)', () => {
  // scipy.optimize.minimize_scalar (bounded, on log T) of the NLL of the mean of the members'
  // softmax(z / T), made by test/fixtures/make-core-fixtures.py.
  reference.ensemble_temperature.forEach((c, i) => {
    it(`finds the temperature scipy finds for a ${c.logits.length}-member ensemble, case ${i + 1} (T = ${c.temperature.toFixed(4)})`, () => {
      const z = c.logits.map((m) => flat(m));
      const rows = c.labels.length;
      const { temperature, fit } = fitEnsembleTemperature(z, rows, c.classes, c.labels);
      expect(fit).toBe('fitted');
      expect(temperature).toBeCloseTo(c.temperature, 6);
      expect(ensembleMeanNll(z, rows, c.classes, c.labels, temperature)).toBeCloseTo(c.nll_at_temperature, 10);
      expect(ensembleMeanNll(z, rows, c.classes, c.labels, 1)).toBeCloseTo(c.nll_at_1, 12);
    });
  });

  it('is the single-network fit when there is one member', () => {
    const c = reference.temperature[0]!;
    const z = flat(c.logits);
    expect(fitEnsembleTemperature([z], c.labels.length, c.classes, c.labels)).toEqual(fitTemperature(z, c.labels.length, c.classes, c.labels));
  });

  it('does not sharpen when every member answers every row right: T stays 1', () => {
    const a = Float64Array.of(5, 0, 0, 5, 4, 0);
    const b = Float64Array.of(3, 1, 1, 2, 6, 1);
    expect(fitEnsembleTemperature([a, b], 3, 2, [0, 1, 0])).toEqual({ temperature: 1, fit: 'separable' });
  });
});

describe('temperature scaling on logits that carry no information', () => {
  it('leaves T at 1 when every row has equal logits, since the NLL does not depend on T', () => {
    expect(fitTemperature(Float64Array.of(2, 2, 2, -1, -1, -1), 2, 3, [0, 2])).toEqual({ temperature: 1, fit: 'flat' });
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
