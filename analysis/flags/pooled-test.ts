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
export function oneSampleTTest(values: readonly number[], alternative: Alternative, nullMean = 0): PooledTest | null {
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
  const half = tQuantile975(df) * se;
  return { n, mean, sessionSd, t, df, pValue, ciLow: mean - half, ciHigh: mean + half };
}

/** t quantile for the 95 % interval, memoised by df (a few distinct df per panel; the inversion is costly). */
const QUANTILE_975 = new Map<number, number>();
function tQuantile975(df: number): number {
  let q = QUANTILE_975.get(df);
  if (q === undefined) {
    q = tQuantile(0.975, df);
    if (QUANTILE_975.size < 10_000) QUANTILE_975.set(df, q);
  }
  return q;
}
