import { mean } from './mean.js';

/**
 * Σ (x_i − x̄)², from centred values (two-pass; never Σx² − n x̄², which cancels badly).
 * Empty input gives NaN.
 * @example sumOfSquaredDeviations([1, 2, 3, 4]) // 5
 */
export function sumOfSquaredDeviations(values: readonly number[]): number {
  if (values.length === 0) return Number.NaN;
  const centre = mean(values);
  let sum = 0;
  for (const value of values) {
    const deviation = value - centre;
    sum += deviation * deviation;
  }
  return sum;
}
