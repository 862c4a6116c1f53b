/**
 * Two-sided tabular CUSUM on standardised values z_t (methods notes §3.5; Page 1954):
 *   C⁺_t = max(0, z_t − k + C⁺_{t−1}),  C⁻_t = max(0, −z_t − k + C⁻_{t−1}),  C⁺_0 = C⁻_0 = 0,
 * signal when C⁺_t > h or C⁻_t > h. After a signal at t the change point is estimated as
 * t − N + 1 (N = consecutive periods with the signalling sum > 0) and the new mean (in z units)
 * as ±(k + C_t/N) (Montgomery, tabular CUSUM section [REC for the section]).
 * The chart is not reset after a signal: the user acknowledges and re-baselines.
 */
import { normalCdf } from '../distributions/index.js';
import { solveDense } from './linear-solve.js';
import { solveIncreasing } from './solve-monotone.js';
import { memoised, type ChartSizingMemo } from './sizing-memo.js';

export interface CusumDesign {
  /** Reference value k (σ units; k = 0.5 is tuned to a 1σ shift). */
  k: number;
  /** Decision interval h (σ units). */
  h: number;
}

export interface CusumPoint {
  upper: number;
  lower: number;
  /** Consecutive periods with C⁺ > 0 (resp. C⁻ > 0) up to this point. */
  nUpper: number;
  nLower: number;
  signal: 'up' | 'down' | null;
}

export interface CusumSignal {
  /** 0-based index of the first signal. */
  index: number;
  direction: 'up' | 'down';
  /** 0-based estimated change point t − N + 1. */
  changePointIndex: number;
  /** Estimated shifted mean in z units: k + C/N (up) or −(k + C/N) (down). */
  estimatedShiftSd: number;
}

export interface CusumChart {
  points: CusumPoint[];
  firstSignal: CusumSignal | null;
}

export function cusumChart(z: readonly number[], design: CusumDesign): CusumChart {
  const { k, h } = design;
  let upper = 0;
  let lower = 0;
  let nUpper = 0;
  let nLower = 0;
  let firstSignal: CusumSignal | null = null;
  const points: CusumPoint[] = [];
  for (let t = 0; t < z.length; t++) {
    upper = Math.max(0, z[t] - k + upper);
    lower = Math.max(0, -z[t] - k + lower);
    nUpper = upper > 0 ? nUpper + 1 : 0;
    nLower = lower > 0 ? nLower + 1 : 0;
    const signal = upper > h ? 'up' : lower > h ? 'down' : null;
    if (signal && !firstSignal) {
      const n = signal === 'up' ? nUpper : nLower;
      const sum = signal === 'up' ? upper : lower;
      firstSignal = {
        index: t,
        direction: signal,
        changePointIndex: t - n + 1,
        estimatedShiftSd: (signal === 'up' ? 1 : -1) * (k + sum / n),
      };
    }
    points.push({ upper, lower, nUpper, nLower, signal });
  }
  return { points, firstSignal };
}

/**
 * One-sided (upper) zero-state ARL by the Markov chain of Brook & Evans (1972): state 0 is an atom
 * covering (−∞, w/2], then nStates − 1 cells of width w = h/(nStates − 0.5) up to h. Returns
 * Infinity when the chain practically never leaves (numerically singular), as methods §3.4 advises.
 */
export function cusumArlOneSided(design: CusumDesign, shiftSd = 0, nStates = 400): number {
  const { k, h } = design;
  const width = h / (nStates - 0.5);
  const mid = new Float64Array(nStates);
  const lowEdge = new Float64Array(nStates);
  const highEdge = new Float64Array(nStates);
  for (let j = 0; j < nStates; j++) {
    mid[j] = j === 0 ? 0 : width * j;
    lowEdge[j] = j === 0 ? -Infinity : mid[j] - width / 2;
    highEdge[j] = j === 0 ? width / 2 : mid[j] + width / 2;
  }
  const matrix: Float64Array[] = [];
  for (let i = 0; i < nStates; i++) {
    const row = new Float64Array(nStates);
    const offset = -mid[i] + k - shiftSd;
    let previousCdf = 0;
    for (let j = 0; j < nStates; j++) {
      const cdfHigh = normalCdf(highEdge[j] + offset);
      row[j] = (i === j ? 1 : 0) - (cdfHigh - previousCdf);
      previousCdf = cdfHigh;
    }
    matrix.push(row);
  }
  const solution = solveDense(matrix, new Float64Array(nStates).fill(1));
  if (!solution) return Infinity;
  const arl = solution[0];
  return Number.isFinite(arl) && arl > 0 && arl < 1e12 ? arl : Infinity;
}

/** Two-sided ARL: 1/ARL = 1/ARL⁺ + 1/ARL⁻ (upper side at shift δ, lower side as upper at −δ). */
export function cusumArl(design: CusumDesign, shiftSd = 0, nStates = 400): number {
  const upper = cusumArlOneSided(design, shiftSd, nStates);
  const lower = shiftSd === 0 ? upper : cusumArlOneSided(design, -shiftSd, nStates);
  return 1 / (1 / upper + 1 / lower);
}

/**
 * Siegmund's approximation to the one-sided ARL (Siegmund 1985, as given by Montgomery):
 * Δ = δ − k, b = h + 1.166, ARL = (exp(−2Δb) + 2Δb − 1)/(2Δ²), or b² when Δ = 0.
 */
export function siegmundArlOneSided(design: CusumDesign, shiftSd = 0): number {
  const delta = shiftSd - design.k;
  const b = design.h + 1.166;
  if (Math.abs(delta) < 1e-12) return b * b;
  return (Math.exp(-2 * delta * b) + 2 * delta * b - 1) / (2 * delta * delta);
}

/** Two-sided Siegmund approximation, 1/ARL = 1/ARL⁺(δ) + 1/ARL⁺(−δ). */
export function siegmundArl(design: CusumDesign, shiftSd = 0): number {
  return 1 / (1 / siegmundArlOneSided(design, shiftSd) + 1 / siegmundArlOneSided(design, -shiftSd));
}

/** h such that the two-sided in-control ARL equals `targetArl0` (root search on h ∈ [0.5, 20]); pure, kept in the caller's memo when given. */
export function cusumIntervalForArl0(k: number, targetArl0: number, nStates = 400, memo?: ChartSizingMemo): number {
  return memoised(memo?.cusumIntervals, `${k}|${targetArl0}|${nStates}`, () => solveIncreasing((interval) => cusumArl({ k, h: interval }, 0, nStates), targetArl0, 0.5, 20));
}
