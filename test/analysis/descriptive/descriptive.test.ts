/**
 * Descriptive building blocks against R (values computed with R 4.2.2: var, cov, cor, rank,
 * printed with digits = 17) and against catastrophic-cancellation cases.
 */
import { describe, expect, it } from 'vitest';
import { mean } from '../../../analysis/descriptive/mean.js';
import { pearsonCorrelation } from '../../../analysis/descriptive/pearson-correlation.js';
import { populationVariance } from '../../../analysis/descriptive/population-variance.js';
import { rankWithTies } from '../../../analysis/descriptive/rank-with-ties.js';
import { sampleCovariance } from '../../../analysis/descriptive/sample-covariance.js';
import { sampleVariance } from '../../../analysis/descriptive/sample-variance.js';
import { sumOfSquaredDeviations } from '../../../analysis/descriptive/sum-of-squared-deviations.js';

describe('descriptive statistics', () => {
  it('match R on the documented examples', () => {
    expect(mean([1, 2, 3, 4])).toBe(2.5);
    expect(sumOfSquaredDeviations([1, 2, 3, 4])).toBe(5);
    expect(sampleVariance([1, 2, 3, 4])).toBe(1.6666666666666667); // R var()
    expect(populationVariance([1, 2, 3, 4])).toBe(1.25);
    expect(sampleCovariance([1, 2, 3], [2, 4, 7])).toBe(2.5); // R cov()
    expect(pearsonCorrelation([1, 2, 3, 4], [2, 4, 5, 9])).toBeCloseTo(0.96476382123773219, 15); // R cor()
    expect(rankWithTies([10, 20, 20, 30])).toEqual({ ranks: [1, 2.5, 2.5, 4], tieSum: 6 }); // R rank()
  });

  it('keep precision where the one-pass formula fails (values near 1e9; variance is shift-invariant)', () => {
    const offset = 1e9;
    const values = [4, 7, 13, 16].map((value) => value + offset);
    expect(sampleVariance(values)).toBe(30); // var(c(4, 7, 13, 16)) = 30, shift-invariant
    expect(mean(values)).toBe(offset + 10);
  });

  it('return NaN when undefined, throw on mismatched pairs', () => {
    expect(mean([])).toBeNaN();
    expect(sampleVariance([3])).toBeNaN();
    expect(populationVariance([])).toBeNaN();
    expect(pearsonCorrelation([1, 1, 1], [1, 2, 3])).toBeNaN();
    expect(() => sampleCovariance([1, 2], [1])).toThrow(/length/);
  });

  it('rank with a tolerance treats rounding-level differences as ties', () => {
    const nearlyTied = [12.8, 12.8 + 1e-13, 20];
    expect(rankWithTies(nearlyTied).ranks).toEqual([1, 2, 3]);
    expect(rankWithTies(nearlyTied, 1e-9)).toEqual({ ranks: [1.5, 1.5, 3], tieSum: 6 });
  });
});
