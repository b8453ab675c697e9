import { describe, expect, it } from 'vitest';
import { ledoitWolf } from '../../../src/core/domain/ledoit-wolf.js';
import reference from '../../fixtures/ledoit-wolf-reference.json' with { type: 'json' };

// scikit-learn 1.2 sklearn.covariance.LedoitWolf().fit(x): location_, covariance_, shrinkage_,
// made by test/fixtures/make-domain-fixtures.py.
describe('Ledoit-Wolf shrinkage covariance (Ledoit & Wolf 2004)', () => {
  for (const c of reference.cases) {
    it(`matches scikit-learn on the "${c.name}" case (${c.rows} rows x ${c.cols} columns, shrinkage ${c.shrinkage.toFixed(4)})`, () => {
      const lw = ledoitWolf(Float64Array.from(c.x.flat()), c.rows, c.cols);
      expect(lw.shrinkage).toBeCloseTo(c.shrinkage, 12);
      Array.from(lw.mean).forEach((v, j) => expect(v).toBeCloseTo(c.location[j]!, 12));
      const expected = c.covariance.flat();
      const scale = Math.max(...expected.map(Math.abs));
      Array.from(lw.covariance).forEach((v, k) => expect(Math.abs(v - expected[k]!) / scale).toBeLessThan(1e-12));
    });
  }

  it('returns the identity when every column is constant, instead of a singular matrix', () => {
    const lw = ledoitWolf(Float64Array.of(2, 5, 2, 5, 2, 5), 3, 2);
    expect(Array.from(lw.covariance)).toEqual([1, 0, 0, 1]);
  });
});
