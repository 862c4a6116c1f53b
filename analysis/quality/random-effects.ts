/**
 * Pooling of estimates from several sessions (methods §5.10): the random-effects prediction of a
 * new session's value from earlier ones (DerSimonian & Laird 1986) and the inverse-variance
 * combination of two estimates (Cochran 1954). Checked against metafor's rma() in
 * test/analysis/quality/random-effects.test.ts. Pure.
 */

export interface Estimate {
  value: number;
  variance: number;
}

export interface RandomEffectsPrediction {
  /** The random-effects mean of the estimates. */
  mean: number;
  /** Its sampling variance, 1 / Σ 1/(V_k + τ̂²). */
  meanVariance: number;
  /** τ̂²: the between-session variance by the method of moments (Cochran's Q), truncated at 0. */
  between: number;
  /** Variance of a new session's value about the mean: meanVariance + τ̂². */
  predictionVariance: number;
}

/** null with fewer than two estimates of positive variance. */
export function randomEffectsPrediction(estimates: readonly Estimate[]): RandomEffectsPrediction | null {
  const usable = estimates.filter((e) => Number.isFinite(e.value) && e.variance > 0);
  if (usable.length < 2) return null;
  let sw = 0;
  let sw2 = 0;
  let swy = 0;
  for (const e of usable) {
    const w = 1 / e.variance;
    sw += w;
    sw2 += w * w;
    swy += w * e.value;
  }
  const fixed = swy / sw;
  const q = usable.reduce((sum, e) => sum + (e.value - fixed) ** 2 / e.variance, 0);
  const between = Math.max(0, (q - (usable.length - 1)) / (sw - sw2 / sw));
  let swr = 0;
  let swry = 0;
  for (const e of usable) {
    const w = 1 / (e.variance + between);
    swr += w;
    swry += w * e.value;
  }
  return { mean: swry / swr, meanVariance: 1 / swr, between, predictionVariance: 1 / swr + between };
}

/** The inverse-variance weighted mean of two estimates and its variance. */
export function inverseVarianceCombination(a: Estimate, b: Estimate): Estimate {
  const precision = 1 / a.variance + 1 / b.variance;
  return { value: (a.value / a.variance + b.value / b.variance) / precision, variance: 1 / precision };
}
