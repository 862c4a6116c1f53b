/**
 * Arithmetic mean, summed in two passes (the second pass adds back the rounding error of the
 * first, as in the corrected two-pass algorithm of Chan, Golub & LeVeque 1983).
 * Empty input gives NaN: callers decide what "undefined" means for them.
 * @example mean([1, 2, 3, 4]) // 2.5
 */
export function mean(values: readonly number[]): number {
  const n = values.length;
  if (n === 0) return Number.NaN;
  // Index loops: a for-of makes an iterator result per value wherever it is not optimised away.
  let sum = 0;
  for (let i = 0; i < n; i++) sum += values[i];
  const first = sum / n;
  let correction = 0;
  for (let i = 0; i < n; i++) correction += values[i] - first;
  return first + correction / n;
}
