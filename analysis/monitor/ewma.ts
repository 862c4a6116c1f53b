/**
 * EWMA chart on standardised values z_t (μ0 = 0, σ = 1), methods notes §3.4.
 *
 *   w_0 = 0,  w_t = λ z_t + (1 − λ) w_{t−1},
 *   exact limits ±L·√(λ/(2 − λ) · [1 − (1 − λ)^{2t}])  (used for signalling, Montgomery's advice
 *   for the start-up period), asymptotic limits ±L·√(λ/(2 − λ)).
 *
 * @see Roberts (1959) Technometrics 1, 239–250; Lucas & Saccucci (1990) Technometrics 32, 1–12.
 * @example ewmaChart([1, 1], { lambda: 0.1, L: 2.7 }).points[1].statistic // 0.19
 */
import { normalCdf } from '../distributions/index.js';
import { solveDense } from './linear-solve.js';
import { solveIncreasing } from './solve-monotone.js';
import { memoised, type ChartSizingMemo } from './sizing-memo.js';

export interface EwmaDesign {
  /** Smoothing weight λ in (0, 1]. */
  lambda: number;
  /** Limit width L in σ_w units. */
  L: number;
}

export interface EwmaPoint {
  statistic: number;
  /** Exact (time-varying) limit half-width at this point. */
  limit: number;
  signal: 'up' | 'down' | null;
}

export interface EwmaChart {
  points: EwmaPoint[];
  /** 0-based index of the first signal, or null. */
  firstSignalIndex: number | null;
}

export function ewmaChart(z: readonly number[], design: EwmaDesign): EwmaChart {
  const { lambda, L } = design;
  const points: EwmaPoint[] = [];
  let w = 0;
  let decay = 1;
  let firstSignalIndex: number | null = null;
  for (let t = 0; t < z.length; t++) {
    w = lambda * z[t] + (1 - lambda) * w;
    decay *= (1 - lambda) * (1 - lambda);
    const limit = L * Math.sqrt((lambda / (2 - lambda)) * (1 - decay));
    const signal = w > limit ? 'up' : w < -limit ? 'down' : null;
    if (signal && firstSignalIndex === null) firstSignalIndex = t;
    points.push({ statistic: w, limit, signal });
  }
  return { points, firstSignalIndex };
}

/**
 * Zero-state ARL of the EWMA with asymptotic limits by the Markov-chain approximation of
 * Brook & Evans (1972) as used by Lucas & Saccucci (1990): [−h, h], h = L√(λ/(2−λ)), split into
 * `nStates` cells of width w; Q_ij = Φ((c_j + w/2 − (1−λ)c_i)/λ − δ) − Φ((c_j − w/2 − (1−λ)c_i)/λ − δ);
 * ARL = (I − Q)^{-1} 1 interpolated at c = 0 (nStates odd puts a midpoint exactly at 0).
 */
export function ewmaArl(design: EwmaDesign, shiftSd = 0, nStates = 301): number {
  const { lambda, L } = design;
  const h = L * Math.sqrt(lambda / (2 - lambda));
  const width = (2 * h) / nStates;
  const mid = new Float64Array(nStates);
  for (let i = 0; i < nStates; i++) mid[i] = -h + width * (i + 0.5);
  const matrix: Float64Array[] = [];
  const edgeCdf = new Float64Array(nStates + 1);
  for (let i = 0; i < nStates; i++) {
    const carried = (1 - lambda) * mid[i];
    for (let e = 0; e <= nStates; e++) edgeCdf[e] = normalCdf((-h + width * e - carried) / lambda - shiftSd);
    const row = new Float64Array(nStates);
    for (let j = 0; j < nStates; j++) row[j] = (i === j ? 1 : 0) - (edgeCdf[j + 1] - edgeCdf[j]);
    matrix.push(row);
  }
  const solution = solveDense(matrix, new Float64Array(nStates).fill(1));
  if (!solution) return Infinity;
  return interpolateAtZero(mid, solution);
}

function interpolateAtZero(mid: Float64Array, values: Float64Array): number {
  for (let i = 0; i + 1 < mid.length; i++) {
    if (mid[i] <= 0 && mid[i + 1] >= 0) {
      const fraction = (0 - mid[i]) / (mid[i + 1] - mid[i]);
      return values[i] + fraction * (values[i + 1] - values[i]);
    }
  }
  return values[Math.floor(mid.length / 2)];
}

/**
 * L such that the in-control zero-state ARL equals `targetArl0` (ARL0 is increasing in L;
 * root search on L ∈ [1.5, 6]). Pure; kept in the caller's memo per (λ, target, nStates) when given.
 */
export function ewmaLimitForArl0(lambda: number, targetArl0: number, nStates = 301, memo?: ChartSizingMemo): number {
  return memoised(memo?.ewmaLimits, `${lambda}|${targetArl0}|${nStates}`, () => solveIncreasing((width) => ewmaArl({ lambda, L: width }, 0, nStates), targetArl0, 1.5, 6));
}
