import { chiSquareUpperTail } from '../distributions/index.js';
import { rankWithTies } from '../descriptive/rank-with-ties.js';
import { seededRandom } from './seeded-random.js';

/**
 * Kendall's coefficient of concordance W with the tie correction, the Friedman χ² test and,
 * on request, a permutation p-value.
 *
 * Each of m judges ranks the same n objects (ties: average ranks); R_i = rank sum of object i,
 * S = Σ_i (R_i − m(n + 1)/2)², W = 12 S / (m²(n³ − n) − m Σ_j T_j), T_j = Σ (t³ − t) over the
 * tie groups of judge j. χ² = m(n − 1)W on n − 1 df is Friedman's tie-corrected statistic
 * (R friedman.test). Permutation p: ranks shuffled independently within judges,
 * p = (1 + #{S* ≥ S}) / (1 + permutations), recommended for n ≤ 7 or m ≤ 4 (Legendre 2005).
 * A judge whose values are all equal carries no ranking: left out and listed in `excludedJudges`.
 * Values within 1e-9 × max(1, max |value|) of each other count as tied (rounding in cell means).
 *
 * @see Kendall & Babington Smith (1939); Friedman (1937); Legendre (2005) JABES 10, 226–245; methods notes §4.3.
 */
export interface KendallWResult {
  /** null when fewer than 3 objects or fewer than 2 judges with a ranking remain. */
  W: number | null;
  chiSquare: number | null;
  df: number;
  pValue: number | null;
  /** Present only when permutations were asked for. */
  permutationPValue: number | null;
  permutations: number;
  nJudges: number;
  nObjects: number;
  /** Indices (into the input) of judges left out because all their values were tied. */
  excludedJudges: number[];
}

export interface KendallWOptions {
  /** Number of random permutations (0 = none, the default). */
  permutations?: number;
  /** Seed of the built-in permutation generator; this or `random` is required when permutations > 0. */
  seed?: number;
  /** A seeded uniform [0, 1) generator of the caller's own, used instead of `seed`. */
  random?: () => number;
}

/** Ratings are recorded to a few decimals; differences below this share of the scale are rounding. */
const TIE_RELATIVE_TOLERANCE = 1e-9;

/** `scores[judge][object]`: each judge's values (or ranks) for the same objects in the same order. */
export function kendallW(scores: readonly (readonly number[])[], options: KendallWOptions = {}): KendallWResult {
  const permutations = options.permutations ?? 0;
  if (permutations > 0 && options.seed === undefined && options.random === undefined) throw new Error('kendallW: a seed is needed for permutation p-values');
  const nObjects = scores.length > 0 ? scores[0].length : 0;
  if (scores.some((row) => row.length !== nObjects)) throw new Error('kendallW: every judge must score the same objects');
  const excludedJudges: number[] = [];
  const rankRows: number[][] = [];
  let tieTotal = 0;
  scores.forEach((row, judge) => {
    if (row.some((value) => !Number.isFinite(value))) throw new Error('kendallW: missing or non-finite score');
    const tolerance = TIE_RELATIVE_TOLERANCE * Math.max(1, ...row.map(Math.abs));
    if (row.every((value) => Math.abs(value - row[0]) <= tolerance)) {
      excludedJudges.push(judge);
      return;
    }
    const { ranks, tieSum } = rankWithTies(row, tolerance);
    rankRows.push(ranks);
    tieTotal += tieSum;
  });
  const m = rankRows.length;
  const n = nObjects;
  const df = n - 1;
  const empty: KendallWResult = { W: null, chiSquare: null, df, pValue: null, permutationPValue: null, permutations, nJudges: m, nObjects: n, excludedJudges };
  if (n < 3 || m < 2) return empty;

  const denominator = m * m * (n * n * n - n) - m * tieTotal;
  const observedS = rankSumSpread(rankRows, n);
  const W = (12 * observedS) / denominator;
  const chiSquare = m * (n - 1) * W;
  let permutationPValue: number | null = null;
  if (permutations > 0) {
    const random = options.random ?? seededRandom(options.seed as number);
    const shuffled = rankRows.map((row) => row.slice());
    // S values are sums of squares of half-integers: compare with a relative guard against rounding.
    const threshold = observedS * (1 - 1e-12);
    let atLeastAsLarge = 0;
    for (let draw = 0; draw < permutations; draw++) {
      for (const row of shuffled) shuffleInPlace(row, random);
      if (rankSumSpread(shuffled, n) >= threshold) atLeastAsLarge++;
    }
    permutationPValue = (1 + atLeastAsLarge) / (1 + permutations);
  }
  return { ...empty, W, chiSquare, pValue: chiSquareUpperTail(chiSquare, df), permutationPValue };
}

/** S = Σ_i (R_i − m(n + 1)/2)². */
function rankSumSpread(rankRows: readonly number[][], n: number): number {
  const expected = (rankRows.length * (n + 1)) / 2;
  let s = 0;
  for (let i = 0; i < n; i++) {
    let rankSum = 0;
    for (const row of rankRows) rankSum += row[i];
    s += (rankSum - expected) ** 2;
  }
  return s;
}

/** Fisher–Yates shuffle. */
function shuffleInPlace(values: number[], random: () => number): void {
  for (let i = values.length - 1; i > 0; i--) {
    const j = Math.floor(random() * (i + 1));
    const swap = values[i];
    values[i] = values[j];
    values[j] = swap;
  }
}
