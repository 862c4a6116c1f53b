import { fUpperTail } from '../distributions/index.js';
import { mean } from '../descriptive/mean.js';
import { productsRatedBy, type CellTable } from './cell-table.js';
import type { IndexReason } from './types.js';

export interface AssessorAnova {
  /** F = [Σ_p n_ap (m_ap − ȳ_a)²/(P_a − 1)] / [SS_within/(N_a − P_a)]. */
  F: number | null;
  dfNumerator: number | null;
  dfDenominator: number | null;
  pValue: number | null;
  /** Within-cell (replicate) sum of squares Σ_p Σ_r (y_apr − m_ap)². */
  withinSumOfSquares: number;
  /** ν_a = N_a − P_a. */
  withinDf: number;
  /** SS_within/ν_a, null when ν_a = 0 (no replicates). */
  withinMeanSquare: number | null;
  nProducts: number;
  nRatings: number;
  reasons: IndexReason[];
}

/**
 * One-way ANOVA of the assessor's own ratings on product: the discrimination index (methods §2.2)
 * and, through its within-cell mean square, the repeatability index (§2.3), as the analyze
 * contract defines them. ȳ_a is the mean of all the assessor's raw ratings.
 * Undefined (null with a reason): fewer than 2 products ('few-products'), no replicates
 * ('no-replicates', ν_a = 0), or no replicate spread at all ('no-spread', F would be infinite).
 * @see any text on the one-way ANOVA; Næs, Brockhoff & Tomic (2010) for its use on assessors [REC for chapter].
 */
export function assessorAnova(table: CellTable, assessor: string): AssessorAnova {
  const row = table.values.get(assessor);
  const products = productsRatedBy(table, assessor);
  const cells = products.map((product) => row!.get(product)!);
  const nRatings = cells.reduce((sum, cell) => sum + cell.length, 0);
  const nProducts = products.length;
  const withinDf = table.withinDf.get(assessor) ?? 0;
  const withinSumOfSquares = table.withinSumOfSquares.get(assessor) ?? 0;
  const cellMeans = products.map((product) => table.cellMeans.get(assessor)!.get(product)!);
  const withinMeanSquare = withinDf > 0 ? withinSumOfSquares / withinDf : null;
  // Plain literals, not object spread: spreading here cost more than the arithmetic (V8).
  const undefinedWith = (reason: IndexReason): AssessorAnova => ({
    F: null,
    dfNumerator: null,
    dfDenominator: null,
    pValue: null,
    withinSumOfSquares,
    withinDf,
    withinMeanSquare,
    nProducts,
    nRatings,
    reasons: [reason],
  });
  if (nProducts < 2) return undefinedWith('few-products');
  if (withinDf === 0) return undefinedWith('no-replicates');
  if (!(withinSumOfSquares > 0)) return undefinedWith('no-spread');
  // All the assessor's ratings in cell order (a loop: Array.prototype.flat is slow in V8).
  const allRatings: number[] = [];
  for (const cell of cells) for (const value of cell) allRatings.push(value);
  const overallMean = mean(allRatings);
  let betweenSumOfSquares = 0;
  cells.forEach((cell, index) => {
    betweenSumOfSquares += cell.length * (cellMeans[index] - overallMean) ** 2;
  });
  const dfNumerator = nProducts - 1;
  const F = betweenSumOfSquares / dfNumerator / (withinMeanSquare as number);
  const pValue = fUpperTail(F, dfNumerator, withinDf);
  return { F, dfNumerator, dfDenominator: withinDf, pValue, withinSumOfSquares, withinDf, withinMeanSquare, nProducts, nRatings, reasons: [] };
}
