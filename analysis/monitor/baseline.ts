/**
 * Phase I (baseline) estimation for a control chart on one series (methods notes §3.2).
 *
 * Centre μ̂0 = mean of the reference values; spread σ̂ = MR̄ / d2 with MR_t = |x_t − x_{t−1}| and
 * d2 = 1.128 (individuals chart, Montgomery, Introduction to Statistical Quality Control, chapter on
 * individuals charts [REC for the chapter]). The moving range is preferred to the sample SD because
 * a drift inside the reference period inflates it less. Fewer than `minimumValues` (default 8) →
 * no limits; fewer than `fullValues` (default 20) → limits labelled provisional (Jensen et al. 2006).
 */

/** d2 for moving ranges of two consecutive values (Montgomery, table of control-chart constants). */
export const D2_MOVING_RANGE_OF_TWO = 1.128;

export type BaselineStatus = 'final' | 'provisional' | 'none';
export type BaselineReason = 'too-few-values' | 'no-variation-in-reference' | null;

export interface BaselineOptions {
  /** Reference values wanted for final limits (default 20). */
  fullValues?: number;
  /** Reference values below which no limits are drawn (default 8). */
  minimumValues?: number;
}

export interface Baseline {
  /** μ̂0, in series units; null when no limits can be drawn. */
  centre: number | null;
  /** σ̂ = MR̄/1.128 (an SD, series units); null when no limits can be drawn. */
  spreadSd: number | null;
  /** Reference values used. */
  nReference: number;
  status: BaselineStatus;
  reason: BaselineReason;
}

/** Estimates centre and spread from reference values (already restricted to the reference period). */
export function estimateBaseline(referenceValues: readonly number[], options: BaselineOptions = {}): Baseline {
  const fullValues = options.fullValues ?? 20;
  const minimumValues = options.minimumValues ?? 8;
  const n = referenceValues.length;
  if (n < minimumValues || n < 2) return { centre: null, spreadSd: null, nReference: n, status: 'none', reason: 'too-few-values' };
  let sum = 0;
  for (const value of referenceValues) sum += value;
  const centre = sum / n;
  let movingRangeSum = 0;
  for (let t = 1; t < n; t++) movingRangeSum += Math.abs(referenceValues[t] - referenceValues[t - 1]);
  const spreadSd = movingRangeSum / (n - 1) / D2_MOVING_RANGE_OF_TWO;
  // Equal values (up to rounding) give no scale to standardise with.
  if (!(spreadSd > 1e-12 * Math.max(1, Math.abs(centre)))) {
    return { centre, spreadSd: null, nReference: n, status: 'none', reason: 'no-variation-in-reference' };
  }
  return { centre, spreadSd, nReference: n, status: n < fullValues ? 'provisional' : 'final', reason: null };
}
