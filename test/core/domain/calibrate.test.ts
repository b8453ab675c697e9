import { describe, expect, it } from 'vitest';
import { auroc } from '../../../src/core/domain/auroc.js';
import { calibrateJoint, conformalThreshold, leaveOneOutPasses, supportedLevel } from '../../../src/core/domain/calibrate.js';
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

describe('joint calibration: one flag, one budget', () => {
  it('with one detector, is the split-conformal threshold itself', () => {
    const rng = createRng(3);
    const a = Float64Array.from({ length: 137 }, () => rng.normal());
    const cal = calibrateJoint([a], 137, 0.95);
    expect(cal.thresholds[0]).toBe(conformalThreshold(a, 0.95));
    expect(cal.level).toBe(0.95);
  });

  it('tightens each detector so that all of them together pass the target share of the calibration rows', () => {
    const rng = createRng(2);
    const n = 2000;
    const a = Float64Array.from({ length: n }, () => rng.normal());
    const b = Float64Array.from({ length: n }, () => rng.normal());
    const cal = calibrateJoint([a, b], n, 0.95);
    const pass = Array.from({ length: n }, (_, r) => (a[r] as number) <= (cal.thresholds[0] as number) && (b[r] as number) <= (cal.thresholds[1] as number)).filter(Boolean).length;
    expect(pass).toBeGreaterThanOrEqual(Math.ceil((n + 1) * 0.95));
    expect(pass / n).toBeLessThan(0.954);
    // two independent detectors: each must pass about sqrt(0.95) = 0.9747 of the rows
    expect(cal.rank / n).toBeGreaterThan(0.97);
    expect(cal.rank / n).toBeLessThan(0.98);
  });

  it('spends no budget on scores tied at a floor (an envelope every row is inside): they rank first, not last', () => {
    const n = 400;
    const floor = new Float64Array(n).fill(0.1);
    const other = Float64Array.from({ length: n }, (_, i) => (i * 7919) % n); // a permutation of 0..399
    const cal = calibrateJoint([floor, other], n, 0.98);
    // As if the floor were not there: the other detector at rank ceil(401 * 0.98) = 393, plus the
    // one rank per-detector thresholds cost. Ranked last, the ties would leave no level at all.
    expect(cal.level).toBe(0.98);
    expect(cal.thresholds[0]).toBe(0.1);
    expect(cal.thresholds[1]).toBe(393);
  });

  it('calibrates to n / (n + 1) where the rows cannot support the target (the conformal limit)', () => {
    const a = Float64Array.from({ length: 50 }, (_, i) => i);
    const cal = calibrateJoint([a], 50, 0.99);
    expect(cal.level).toBeCloseTo(50 / 51, 15);
    expect(cal.thresholds[0]).toBe(49);
    expect(supportedLevel(99, 0.99)).toBe(0.99);
    expect(supportedLevel(98, 0.99)).toBeCloseTo(98 / 99, 15);
  });

  // Per trial: n calibration rows and one new row, all from one distribution, so that the count
  // of passes over the trials is exactly binomial with the pass probability. Three or four
  // correlated detectors; 99% binomial bounds are +- 2.576 sqrt(p(1-p)/trials).
  const draw = (rng: ReturnType<typeof createRng>, J: number): number[] => {
    const z = rng.normal();
    return Array.from({ length: J }, (_, j) => (j === 1 ? Math.abs(z + 0.5 * rng.normal()) : j === 2 ? rng.normal() ** 2 : 0.6 * z + 0.8 * rng.normal()));
  };
  const coverage = (n: number, J: number, target: number, trials: number, seed: number): { passed: number; level: number } => {
    const rng = createRng(seed);
    let passed = 0;
    let level = 0;
    for (let t = 0; t < trials; t++) {
      const rowsOf = Array.from({ length: n }, () => draw(rng, J));
      const cal = calibrateJoint(Array.from({ length: J }, (_, j) => Float64Array.from(rowsOf, (r) => r[j] as number)), n, target);
      level += cal.level / trials;
      if (draw(rng, J).every((v, j) => v <= (cal.thresholds[j] as number))) passed++;
    }
    return { passed: passed / trials, level };
  };

  it('passes new exchangeable rows at least at the level (the conformal guarantee, Vovk et al. 2005), and not much more, for three correlated detectors', () => {
    const n = 150;
    const trials = 3000;
    const { passed, level } = coverage(n, 3, 0.9, trials, 7);
    expect(level).toBeCloseTo(0.9, 12);
    const noise = 2.576 * Math.sqrt((0.9 * 0.1) / trials);
    expect(passed).toBeGreaterThan(0.9 - noise);
    // the price of per-detector thresholds: at most about one row in n + 1 per detector
    expect(passed).toBeLessThan(Math.ceil((n + 1) * 0.9) / (n + 1) + 3 / (n + 1) + noise);
  });

  it('lowers the level where a union of detectors cannot promise the target, and still keeps what it promises', () => {
    // 105 rows and four detectors: each detector's largest row fails any threshold below the
    // maximum, so 0.99 is out of reach. Thresholds at every detector's maximum would pass a new
    // row only about 1 - 4/106 = 0.96 of the time, though every calibration row passes them.
    const trials = 3000;
    const { passed, level } = coverage(105, 4, 0.99, trials, 11);
    expect(level).toBeLessThan(0.99);
    expect(level).toBeGreaterThan(0.94);
    expect(passed).toBeGreaterThan(level - 2.576 * Math.sqrt((level * (1 - level)) / trials));
  });

  it('with no more rows than detectors, supports no level and still gives finite thresholds: the largest scores', () => {
    for (const rows of [1, 2]) {
      const cols = [Float64Array.from({ length: rows }, (_, i) => i + 1), Float64Array.from({ length: rows }, (_, i) => 10 - i)];
      const cal = calibrateJoint(cols, rows, 0.99);
      expect(cal.level).toBeLessThan(0.5);
      expect(cal.thresholds).toEqual(cols.map((c) => Math.max(...c)));
    }
  });

  it('measures the pass rate leave-one-out: each row against thresholds calibrated on the other rows, by definition', () => {
    const rng = createRng(21);
    const n = 60;
    for (const target of [0.9, 0.99]) {
      const rowsOf = Array.from({ length: n }, () => draw(rng, 3));
      const cols = [0, 1, 2].map((j) => Float64Array.from(rowsOf, (r) => r[j] as number));
      const cal = calibrateJoint(cols, n, target);
      const expected = rowsOf.map((row, i) => {
        const others = cols.map((c) => Float64Array.from(c.filter((_, l) => l !== i)));
        const t = calibrateJoint(others, n - 1, target).thresholds;
        return row.every((v, j) => v <= (t[j] as number));
      });
      expect(cal.looPasses).toEqual(expected);
    }
    // one detector, 20 rows, 0.99: in sample the threshold is the largest score and every row
    // passes, but the largest row, left out, meets a threshold of the next one and fails
    const a = Float64Array.from({ length: 20 }, (_, i) => i);
    expect(calibrateJoint([a], 20, 0.99).looPasses.filter((p) => !p)).toHaveLength(1);
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
