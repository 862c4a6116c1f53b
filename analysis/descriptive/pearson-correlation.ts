import { mean } from './mean.js';

/**
 * Pearson product-moment correlation of paired values, from centred sums.
 * NaN when fewer than 2 pairs or when either variable has no spread (zero sum of squares).
 * Unequal lengths throw (a programming error).
 * @example pearsonCorrelation([1, 2, 3, 4], [2, 4, 5, 9]) // 0.9647638212377322
 */
export function pearsonCorrelation(x: readonly number[], y: readonly number[]): number {
  if (x.length !== y.length) throw new Error('pearsonCorrelation: x and y differ in length');
  if (x.length < 2) return Number.NaN;
  const meanX = mean(x);
  const meanY = mean(y);
  let sxx = 0;
  let syy = 0;
  let sxy = 0;
  for (let i = 0; i < x.length; i++) {
    const dx = x[i] - meanX;
    const dy = y[i] - meanY;
    sxx += dx * dx;
    syy += dy * dy;
    sxy += dx * dy;
  }
  if (!(sxx > 0) || !(syy > 0)) return Number.NaN;
  return sxy / Math.sqrt(sxx * syy);
}
