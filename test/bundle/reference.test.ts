import { describe, expect, it } from 'vitest';
import { REFERENCE_SAMPLE_MAX, fitReference } from '../../src/bundle/reference.js';
import { createRng } from '../../src/core/rng.js';

function input(rows: number) {
  const x = Float64Array.from({ length: rows * 2 }, (_, i) => (i % 2 === 0 ? Math.floor(i / 2) : (i % 7) * 0.5));
  return {
    x,
    rows,
    featureNames: ['index', 'steps'],
    labels: Int32Array.from({ length: rows }, (_, i) => (i % 4 === 0 ? 1 : 0)),
    classes: ['ok', 'scrap'],
    validation: { predicted: Int32Array.of(0, 0, 1), margins: Float64Array.of(0.9, 0.5, 0.2) },
  };
}

describe('reference summary', () => {
  it('keeps every row verbatim up to 10,000 rows', () => {
    const ref = fitReference(input(300), createRng(1));
    expect(ref.sample).toMatchObject({ rows: 300, subsampled: false });
    expect(ref.sample.values[0]!.slice(0, 3)).toEqual([0, 1, 2]);
  });

  it('keeps a seeded uniform subsample of 10,000 rows above that, in file order, the same for the same seed', () => {
    const big = input(25_000);
    const a = fitReference(big, createRng(7));
    const b = fitReference(big, createRng(7));
    expect(a.sample).toMatchObject({ rows: REFERENCE_SAMPLE_MAX, subsampled: true });
    expect(a.sample.values).toEqual(b.sample.values);
    const kept = a.sample.values[0]!;
    expect(kept.every((v, i) => i === 0 || v > kept[i - 1]!)).toBe(true);
    // a uniform subsample of 0..24999 has mean near 12499.5 (standard error 7217 / sqrt(10000) = 72)
    expect(Math.abs(kept.reduce((s, v) => s + v, 0) / kept.length - 12_499.5)).toBeLessThan(400);
    expect(fitReference(big, createRng(8)).sample.values[0]).not.toEqual(kept);
  });

  it('bins each feature by its training deciles and records the share of rows in each bin', () => {
    const ref = fitReference(input(1000), createRng(1));
    const index = ref.features[0]!;
    expect(index.bin_edges).toHaveLength(9);
    index.bin_fractions.forEach((f) => expect(f).toBeCloseTo(0.1, 2));
    // "steps" takes 7 values only: tied deciles collapse into fewer, non-empty bins
    const steps = ref.features[1]!;
    expect(steps.bin_edges.length).toBeLessThan(9);
    expect(steps.bin_fractions.every((f) => f > 0)).toBe(true);
    expect(steps.bin_fractions.reduce((a, b) => a + b, 0)).toBeCloseTo(1, 12);
  });

  it('records the class prior and the validation predictions and margins', () => {
    const ref = fitReference(input(400), createRng(1));
    expect(ref.class_prior).toEqual({ ok: 0.75, scrap: 0.25 });
    expect(ref.validation).toEqual({ rows: 3, predicted_fractions: { ok: 2 / 3, scrap: 1 / 3 }, margins: [0.9, 0.5, 0.2] });
  });
});
