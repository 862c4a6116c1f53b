import { mean } from './mean.js';

/**
 * Sample covariance Σ (x_i − x̄)(y_i − ȳ) / (n − 1) of paired values.
 * Fewer than 2 pairs gives NaN; unequal lengths throw (a programming error).
 * @example sampleCovariance([1, 2, 3], [2, 4, 7]) // 2.5
 */
export function sampleCovariance(x: readonly number[], y: readonly number[]): number {
  if (x.length !== y.length) throw new Error('sampleCovariance: x and y differ in length');
  if (x.length < 2) return Number.NaN;
  const meanX = mean(x);
  const meanY = mean(y);
  let sum = 0;
  for (let i = 0; i < x.length; i++) sum += (x[i] - meanX) * (y[i] - meanY);
  return sum / (x.length - 1);
}
