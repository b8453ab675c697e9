import { describe, expect, it } from 'vitest';
import { auroc } from '../../../src/core/domain/auroc.js';
import { calibrateComposite, conformalThreshold, leaveOneOutPasses } from '../../../src/core/domain/calibrate.js';
import { createRng } from '../../../src/core/rng.js';

describe('conformal threshold (Lei et al. 2018)', () => {
  it('is the ceil((n+1)p)-th smallest score', () => {
    const scores = [5, 1, 4, 2, 3, 9, 8, 7, 6, 10]; // n = 10
    expect(conformalThreshold(scores, 0.5)).toBe(6); // ceil(11 * 0.5) = 6th smallest
    expect(conformalThreshold(scores, 0.9)).toBe(10); // ceil(9.9) = 10th
    expect(conformalThreshold(scores, 0.95)).toBe(10); // capped at the largest
  });

  it('lets through at least the target share of new exchangeable rows, on average', () => {
    const rng = createRng(8);
    let passed = 0;
    let total = 0;
    for (let trial = 0; trial < 200; trial++) {
      const held = Array.from({ length: 200 }, () => rng.normal());
      const t = conformalThreshold(held, 0.9);
      for (let k = 0; k < 100; k++) {
        total++;
        if (rng.normal() <= t) passed++;
      }
    }
    // expected coverage is ceil(201 * 0.9) / 201 = 0.9005; 20,000 draws: standard error 0.0021
    expect(passed / total).toBeGreaterThan(0.9005 - 0.008);
  });
});

describe('leave-one-out pass rate', () => {
  it('checks each row against the threshold the other rows would set', () => {
    // n = 10, level 0.8: without row i, the threshold is the ceil(10 * 0.8) = 8th smallest of the
    // other nine; rows at or below the 8th smallest of all pass, the two largest do not.
    const scores = [5, 1, 4, 2, 3, 9, 8, 7, 6, 10];
    expect(leaveOneOutPasses(scores, 0.8)).toEqual(scores.map((v) => v <= 8));
  });

  it('is not fooled, as the in-sample rate is, when the threshold is the largest score', () => {
    const scores = Array.from({ length: 20 }, (_, i) => i);
    // conformal at 0.99 with n = 20 takes the largest score, so in sample every row passes ...
    expect(scores.every((v) => v <= conformalThreshold(scores, 0.99))).toBe(true);
    // ... but the largest row, left out, meets a threshold of 18 and fails
    expect(leaveOneOutPasses(scores, 0.99).filter((p) => !p)).toHaveLength(1);
  });
});

describe('composite calibration', () => {
  it('tightens each detector so that all of them together pass the target share of held-out rows', () => {
    const rng = createRng(2);
    const n = 2000;
    const a = Float64Array.from({ length: n }, () => rng.normal());
    const b = Float64Array.from({ length: n }, () => rng.normal());
    const cal = calibrateComposite([a, b], n, 0.95);
    expect(cal.passRate).toBeGreaterThanOrEqual(0.95);
    expect(cal.passRate).toBeLessThan(0.955);
    // two independent detectors: each must pass about sqrt(0.95) = 0.9747 of the rows
    expect(cal.level).toBeGreaterThan(0.97);
    expect(cal.level).toBeLessThan(0.98);
  });

  it('counts rows a fixed detector fails against the target', () => {
    const n = 1000;
    const a = Float64Array.from({ length: n }, (_, i) => i);
    const cal = calibrateComposite([a], n, 0.9, (r) => r % 50 !== 0); // the fixed one fails 2%
    expect(cal.passRate).toBeGreaterThanOrEqual(0.9);
    expect(cal.level).toBeGreaterThan(0.91);
  });
});

describe('AUROC', () => {
  it('is 1 for perfect separation, 0.5 for identical scores, and the Mann-Whitney share in between', () => {
    expect(auroc([1, 2, 3], [4, 5])).toBe(1);
    expect(auroc([1, 1], [1, 1])).toBe(0.5);
    // pairs (neg, pos): (1,2) win, (1,0) loss, (3,2) loss, (3,0) loss -> 1/4
    expect(auroc([1, 3], [2, 0])).toBe(0.25);
    // ties count one half: (2,2) half, (2,3) win -> 0.75
    expect(auroc([2], [2, 3])).toBe(0.75);
  });
});
