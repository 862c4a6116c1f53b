import { sumOfSquaredDeviations } from './sum-of-squared-deviations.js';

/**
 * Population (n denominator) variance. Empty input gives NaN.
 * @example populationVariance([1, 2, 3, 4]) // 1.25
 */
export function populationVariance(values: readonly number[]): number {
  if (values.length === 0) return Number.NaN;
  return sumOfSquaredDeviations(values) / values.length;
}
