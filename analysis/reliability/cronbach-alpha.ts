import { sampleVariance } from '../descriptive/sample-variance.js';

/**
 * Cronbach's alpha with judges (assessors) as items and targets (products) as cases:
 * α = k/(k − 1) · (1 − Σ_j s²_j / s²_T), s²_j the variance over targets of judge j's column,
 * s²_T the variance over targets of the row sums. Equals ICC(3,k) on the same matrix, so report
 * one of the two, not both as independent evidence. null when the row sums have no spread.
 *
 * @see Cronbach, L. J. (1951) Psychometrika 16, 297–334; methods notes §4.4.
 * @example cronbachAlpha(shroutFleissTable2) // 0.909316 (= ICC(3,4))
 */
export function cronbachAlpha(matrix: readonly (readonly number[])[]): number | null {
  const nTargets = matrix.length;
  const nJudges = nTargets > 0 ? matrix[0].length : 0;
  if (nTargets < 2 || nJudges < 2) throw new Error('cronbachAlpha: need at least 2 targets and 2 judges');
  if (matrix.some((row) => row.length !== nJudges)) throw new Error('cronbachAlpha: the matrix is not complete');
  let sumOfItemVariances = 0;
  for (let j = 0; j < nJudges; j++) sumOfItemVariances += sampleVariance(matrix.map((row) => row[j]));
  const totalVariance = sampleVariance(matrix.map((row) => row.reduce((sum, value) => sum + value, 0)));
  if (!(totalVariance > 0)) return null;
  return (nJudges / (nJudges - 1)) * (1 - sumOfItemVariances / totalVariance);
}
