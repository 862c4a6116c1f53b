import { mean } from '../descriptive/mean.js';

/**
 * Mean squares of the two-way ANOVA without interaction on a complete targets × judges matrix
 * (products × assessors in a panel), the inputs of the Shrout & Fleiss ICCs.
 * Sums of squares are formed from centred row, column and cell deviations (two-pass).
 *
 * @see Shrout, P. E. & Fleiss, J. L. (1979) Psychological Bulletin 86, 420–428, Table 1 (BMS, JMS, EMS, WMS).
 */
export interface TwoWayMeanSquares {
  nTargets: number;
  nJudges: number;
  /** BMS: between targets, df nTargets − 1. */
  betweenTargetsMeanSquare: number;
  /** JMS: between judges, df nJudges − 1. */
  betweenJudgesMeanSquare: number;
  /** EMS: residual (targets × judges), df (nTargets − 1)(nJudges − 1). */
  residualMeanSquare: number;
  /** WMS: within targets = (SS_judges + SS_residual)/(nTargets (nJudges − 1)). */
  withinTargetsMeanSquare: number;
}

/** `matrix[target][judge]`; every row the same length, every value finite. Throws otherwise. */
export function twoWayMeanSquares(matrix: readonly (readonly number[])[]): TwoWayMeanSquares {
  const nTargets = matrix.length;
  const nJudges = nTargets > 0 ? matrix[0].length : 0;
  if (nTargets < 2 || nJudges < 2) throw new Error('twoWayMeanSquares: need at least 2 targets and 2 judges');
  for (const row of matrix) {
    if (row.length !== nJudges) throw new Error('twoWayMeanSquares: the matrix is not complete (rows differ in length)');
    for (const value of row) if (!Number.isFinite(value)) throw new Error('twoWayMeanSquares: the matrix has a missing or non-finite value');
  }
  const rowMeans = matrix.map((row) => mean(row));
  const columnMeans = Array.from({ length: nJudges }, (_, j) => mean(matrix.map((row) => row[j])));
  const grandMean = mean(rowMeans);
  let ssTargets = 0;
  for (const m of rowMeans) ssTargets += (m - grandMean) ** 2;
  ssTargets *= nJudges;
  let ssJudges = 0;
  for (const m of columnMeans) ssJudges += (m - grandMean) ** 2;
  ssJudges *= nTargets;
  let ssResidual = 0;
  for (let i = 0; i < nTargets; i++) {
    for (let j = 0; j < nJudges; j++) ssResidual += (matrix[i][j] - rowMeans[i] - columnMeans[j] + grandMean) ** 2;
  }
  return {
    nTargets,
    nJudges,
    betweenTargetsMeanSquare: ssTargets / (nTargets - 1),
    betweenJudgesMeanSquare: ssJudges / (nJudges - 1),
    residualMeanSquare: ssResidual / ((nTargets - 1) * (nJudges - 1)),
    withinTargetsMeanSquare: (ssJudges + ssResidual) / (nTargets * (nJudges - 1)),
  };
}
