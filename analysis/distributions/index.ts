/**
 * Named wrappers over jstat: the only place that imports it.
 * Upper tails are computed directly from the regularised incomplete beta/gamma functions,
 * never as 1 - CDF (which loses everything below ~1e-16); identities from
 * Abramowitz & Stegun (1964) 26.6.2 and 26.7.1 (equation numbers from memory).
 */
import jstatModule from 'jstat';
import { inverseRegularizedIncompleteBeta, regularizedIncompleteBeta } from './incomplete-beta.js';
import { inverseRegularizedGammaP, regularizedGammaQ } from './incomplete-gamma.js';

const { jStat } = jstatModule;

/** P(F(df1, df2) >= f), computed as I_x(df2/2, df1/2) with x = df2/(df2 + df1 f). */
export function fUpperTail(f: number, df1: number, df2: number): number {
  if (Number.isNaN(f) || !(df1 > 0) || !(df2 > 0)) return Number.NaN;
  if (f <= 0) return 1;
  if (f === Infinity) return 0;
  const x = df2 / (df2 + df1 * f);
  return clampProbability(regularizedIncompleteBeta(x, df2 / 2, df1 / 2));
}

/** Two-sided P(|t_df| >= |t|) = I_x(df/2, 1/2), x = df/(df + t^2). */
export function tTwoSidedP(t: number, df: number): number {
  if (Number.isNaN(t) || !(df > 0)) return Number.NaN;
  if (!Number.isFinite(t)) return 0;
  const x = df / (df + t * t);
  return clampProbability(regularizedIncompleteBeta(x, df / 2, 0.5));
}

/** One-sided upper P(t_df >= t). */
export function tUpperTail(t: number, df: number): number {
  const twoSided = tTwoSidedP(t, df);
  return t >= 0 ? twoSided / 2 : 1 - twoSided / 2;
}

/** P(chi2_df >= x) = Q(df/2, x/2), the regularised upper incomplete gamma function. */
export function chiSquareUpperTail(x: number, df: number): number {
  if (Number.isNaN(x) || !(df > 0)) return Number.NaN;
  if (x <= 0) return 1;
  if (x === Infinity) return 0;
  return clampProbability(regularizedGammaQ(df / 2, x / 2));
}

/** Standard normal or N(mean, sd^2) CDF. */
export function normalCdf(x: number, params: { mean: number; sd: number } = { mean: 0, sd: 1 }): number {
  return jStat.normal.cdf(x, params.mean, params.sd);
}

/** Quantile of N(mean, sd^2). */
export function normalQuantile(probability: number, params: { mean: number; sd: number } = { mean: 0, sd: 1 }): number {
  return jStat.normal.inv(probability, params.mean, params.sd);
}

/** Quantile t such that P(t_df <= t) = probability. */
export function tQuantile(probability: number, df: number): number {
  if (!(probability > 0)) return -Infinity;
  if (!(probability < 1)) return Infinity;
  if (probability === 0.5) return 0;
  // P(|t| >= q) = I_x(df/2, 1/2) with x = df/(df + q^2): invert for the two-sided tail.
  const twoSidedTail = 2 * Math.min(probability, 1 - probability);
  const x = inverseRegularizedIncompleteBeta(twoSidedTail, df / 2, 0.5);
  const magnitude = Math.sqrt((df * (1 - x)) / x);
  return probability < 0.5 ? -magnitude : magnitude;
}

/** Quantile f such that P(F(df1, df2) <= f) = probability (real-valued df allowed). */
export function fQuantile(probability: number, df1: number, df2: number): number {
  // Invert through the beta distribution for accuracy: if X ~ Beta(df1/2, df2/2) then F = (X/df1)/((1-X)/df2).
  const x = inverseRegularizedIncompleteBeta(probability, df1 / 2, df2 / 2);
  return (x / df1) / ((1 - x) / df2);
}

/** Quantile c such that P(chi2_df <= c) = probability. */
export function chiSquareQuantile(probability: number, df: number): number {
  return 2 * inverseRegularizedGammaP(probability, df / 2);
}

/**
 * p-value of the boundary likelihood-ratio test for one variance component:
 * 50:50 mixture of chi2_0 and chi2_1 (Self & Liang 1987; Stram & Lee 1994).
 * LR <= 0 gives 1.
 */
export function boundaryLrtPValue(likelihoodRatio: number): number {
  if (!(likelihoodRatio > 0)) return 1;
  return 0.5 * chiSquareUpperTail(likelihoodRatio, 1);
}

function clampProbability(p: number): number {
  if (p < 0) return 0;
  if (p > 1) return 1;
  return p;
}
