/**
 * One-sample t test on per-session index values pooled over recent sessions (Student 1908).
 * Each session's value is one observation, so session-to-session variation is the error term:
 * an assessor is flagged for a persistent pattern, not for one bad session (CP, ours).
 */
import { tQuantile, tTwoSidedP, tUpperTail } from '../distributions/index.js';

export type Alternative = 'two-sided' | 'greater' | 'less';

export interface PooledTest {
  n: number;
  mean: number;
  /** Sample SD of the session values (n − 1 denominator). */
  sessionSd: number;
  t: number;
  df: number;
  pValue: number;
  /** 95 % confidence interval of the mean. */
  ciLow: number;
  ciHigh: number;
}

/** null when fewer than two values. A zero SD with a non-zero mean gives t = ±∞ and p = 0. */
/** `quantiles`: a df → t(0.975) table the caller keeps for one build (results are the same without). */
export function oneSampleTTest(values: readonly number[], alternative: Alternative, nullMean = 0, quantiles?: Map<number, number>): PooledTest | null {
  const n = values.length;
  if (n < 2) return null;
  let sum = 0;
  for (const v of values) sum += v;
  const mean = sum / n;
  let squares = 0;
  for (const v of values) squares += (v - mean) * (v - mean);
  const sessionSd = Math.sqrt(squares / (n - 1));
  const se = sessionSd / Math.sqrt(n);
  const df = n - 1;
  const difference = mean - nullMean;
  const t = se > 0 ? difference / se : difference === 0 ? 0 : Math.sign(difference) * Infinity;
  let pValue: number;
  if (alternative === 'two-sided') pValue = Number.isFinite(t) ? tTwoSidedP(t, df) : 0;
  else if (alternative === 'greater') pValue = Number.isFinite(t) ? tUpperTail(t, df) : t > 0 ? 0 : 1;
  else pValue = Number.isFinite(t) ? tUpperTail(-t, df) : t < 0 ? 0 : 1;
  const half = tQuantile975(df, quantiles) * se;
  return { n, mean, sessionSd, t, df, pValue, ciLow: mean - half, ciHigh: mean + half };
}

/** t quantile for the 95 % interval; kept in the caller's table when given (few distinct df per build; the inversion costs about 50 µs). */
function tQuantile975(df: number, quantiles?: Map<number, number>): number {
  let q = quantiles?.get(df);
  if (q === undefined) {
    q = tQuantile(0.975, df);
    quantiles?.set(df, q);
  }
  return q;
}
