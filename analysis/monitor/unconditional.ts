/**
 * EWMA limits sized for the in-control false-alarm rate *averaged over the Phase I estimation
 * error* (the "unconditional" performance discussed by Jensen et al. 2006 and Quesenberry 1993).
 * With a baseline of N values, μ̂0 = μ + εσ with ε ~ N(0, 1/N) and σ̂ = uσ with u² ≈ χ²_ν/ν,
 * ν ≈ 0.62 (N − 1) for the moving-range estimator (we measured 0.61–0.63 by simulation for
 * N = 8…50; the same constant is commonly quoted for MR̄ [REC]). A chart with limit L on the
 * standardised values then behaves like a chart on unit-variance data with limit L·u and a
 * persistent shift −ε, so its false-alarm rate per point is E[1 / ARL(L·u, ε)]. L is chosen so
 * that this equals 1 / targetArl0. Without this, a 20-value baseline gave about 50 times the
 * nominal false-alarm rate at ARL0 ≈ 60 000 in our simulation.
 * ARL(L, δ) comes from the Brook–Evans chain (ewmaArl) on a grid, interpolated in log ARL.
 */
import { chiSquareQuantile, normalQuantile } from '../distributions/index.js';
import { ewmaArl } from './ewma.js';
import { DEFAULT_LAMBDA_GRID } from './arl-grid-default.js';
import { solveIncreasing } from './solve-monotone.js';
import { memoised, type ChartSizingMemo } from './sizing-memo.js';

/** Effective degrees of freedom of MR̄/d2 from N values (see header). */
export function movingRangeDf(nReference: number): number {
  return 0.62 * (nReference - 1);
}

const L_GRID = [0.5, 1, 1.5, 2, 2.25, 2.5, 2.75, 3, 3.25, 3.5, 3.75, 4, 4.25, 4.5, 4.75, 5, 5.5, 6, 6.5, 7, 8];
// Centre errors |ε| at the quadrature nodes are at most 2.04/√N (0.72 for N = 8); beyond 1 the grid is
// clamped, which only matters for baselines shorter than the default minimum of 8.
const SHIFT_GRID = [0, 0.2, 0.4, 0.6, 0.8, 1];
/** 61 states: in-control ARLs within ~2 % of the 301-state values, enough for sizing. */
const GRID_STATES = 61;

/** log ARL on the (L, shift) grid for one λ: 126 Brook–Evans chains (about 0.15 s). */
export function computeLogArlGrid(lambda: number): Float64Array[] {
  return L_GRID.map((L) => Float64Array.from(SHIFT_GRID.map((shift) => Math.log(Math.min(ewmaArl({ lambda, L }, shift, GRID_STATES), 1e12)))));
}

// The default λ's grid ships precomputed as a constant table (a worker thread's first flag build
// would otherwise spend 0.15–0.3 s on it); test/analysis/monitor/arl-grid.test.ts recomputes it and
// compares every value exactly, so the numbers are the same as computing them.
const DEFAULT_GRID: readonly Float64Array[] = DEFAULT_LAMBDA_GRID.logArl.map((row) => Float64Array.from(row));

function logArlGrid(lambda: number, memo?: ChartSizingMemo): readonly Float64Array[] {
  if (lambda === DEFAULT_LAMBDA_GRID.lambda) return DEFAULT_GRID;
  return memoised(memo?.logArlGrids, lambda, () => computeLogArlGrid(lambda));
}

function interpolate(grid: readonly number[], value: number): { index: number; fraction: number } {
  if (value <= grid[0]) return { index: 0, fraction: 0 };
  if (value >= grid[grid.length - 1]) return { index: grid.length - 2, fraction: 1 };
  let index = 0;
  while (grid[index + 1] < value) index++;
  return { index, fraction: (value - grid[index]) / (grid[index + 1] - grid[index]) };
}

/** log ARL(L, |shift|) by bilinear interpolation on the grid (beyond the grid: clamped). */
function logArl(grid: readonly Float64Array[], L: number, shift: number): number {
  const a = interpolate(L_GRID, L);
  const b = interpolate(SHIFT_GRID, Math.abs(shift));
  const v00 = grid[a.index][b.index];
  const v01 = grid[a.index][b.index + 1];
  const v10 = grid[a.index + 1][b.index];
  const v11 = grid[a.index + 1][b.index + 1];
  return (1 - a.fraction) * ((1 - b.fraction) * v00 + b.fraction * v01) + a.fraction * ((1 - b.fraction) * v10 + b.fraction * v11);
}

const QUADRATURE_POINTS = 24;

interface QuadratureNodes {
  spreads: Float64Array;
  shifts: Float64Array;
}

/**
 * E[1/ARL(L·u, ε)] over the estimation error of a baseline of `nReference` values.
 * `spreadFloor`: when the spread used is max(own σ̂, a panel-pooled σ̂) and the pooled one is
 * precise, u is effectively max(u, spreadFloor) with spreadFloor ≈ 1 for an ordinary series.
 */
export function unconditionalFalseAlarmRate(lambda: number, L: number, nReference: number, spreadFloor = 0, memo?: ChartSizingMemo): number {
  return averageFalseAlarmRate(logArlGrid(lambda, memo), L, nodesFor(nReference, spreadFloor, memo));
}

function averageFalseAlarmRate(grid: readonly Float64Array[], L: number, { spreads, shifts }: QuadratureNodes): number {
  let total = 0;
  for (let i = 0; i < QUADRATURE_POINTS; i++) {
    const u = spreads[i];
    for (let j = 0; j < QUADRATURE_POINTS / 2; j++) total += Math.exp(-logArl(grid, L * u, shifts[j]));
  }
  return total / (QUADRATURE_POINTS * (QUADRATURE_POINTS / 2));
}

/**
 * Equal-probability nodes (midpoint rule on the probability scale) for u and ε; they do not
 * depend on L, so the root search on L computes them once (the quantile inversions were most of
 * a limit's cost).
 */
function quadratureNodes(nReference: number, spreadFloor: number): QuadratureNodes {
  const df = movingRangeDf(nReference);
  const centreSd = 1 / Math.sqrt(nReference);
  const spreads = new Float64Array(QUADRATURE_POINTS);
  const shifts = new Float64Array(QUADRATURE_POINTS / 2);
  for (let i = 0; i < QUADRATURE_POINTS; i++) spreads[i] = Math.max(spreadFloor, Math.sqrt(chiSquareQuantile((i + 0.5) / QUADRATURE_POINTS, df) / df));
  for (let j = 0; j < QUADRATURE_POINTS / 2; j++) shifts[j] = centreSd * normalQuantile((j + 0.5) / QUADRATURE_POINTS);
  return { spreads, shifts };
}

function nodesFor(nReference: number, spreadFloor: number, memo?: ChartSizingMemo): QuadratureNodes {
  return memoised(memo?.quadratureNodes, `${nReference}|${spreadFloor}`, () => quadratureNodes(nReference, spreadFloor));
}

/** L whose unconditional in-control ARL (1 / average false-alarm rate) is `targetArl0`; pure, kept in the caller's memo when given. */
export function ewmaLimitForUnconditionalArl0(lambda: number, targetArl0: number, nReference: number, spreadFloor = 0, memo?: ChartSizingMemo): number {
  return memoised(memo?.unconditionalLimits, `${lambda}|${targetArl0}|${nReference}|${spreadFloor}`, () => {
    const grid = logArlGrid(lambda, memo);
    const nodes = nodesFor(nReference, spreadFloor, memo);
    return solveIncreasing((width) => 1 / averageFalseAlarmRate(grid, width, nodes), targetArl0, 1.5, 7.9, 1e-5);
  });
}
