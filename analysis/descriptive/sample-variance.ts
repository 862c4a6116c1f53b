import { sumOfSquaredDeviations } from './sum-of-squared-deviations.js';

/**
 * Sample (unbiased, n − 1 denominator) variance. Fewer than 2 values gives NaN.
 * @example sampleVariance([1, 2, 3, 4]) // 1.6666666666666667 (= 5/3)
 */
export function sampleVariance(values: readonly number[]): number {
  if (values.length < 2) return Number.NaN;
  return sumOfSquaredDeviations(values) / (values.length - 1);
}
