import { fUpperTail, normalQuantile } from '../distributions/index.js';
import { mean } from '../descriptive/mean.js';
import { pearsonCorrelation } from '../descriptive/pearson-correlation.js';
import type { BalancedAnova } from './balanced-anova.js';
import { cellMean, cellMeansOfProduct, productsRatedBy, type CellTable } from './cell-table.js';
import type { IndexReason } from './types.js';

export interface AgreementCorrelation {
  /** Pearson r of m_ap with the mean of the other assessors' cell means, over shared products. */
  r: number | null;
  nProducts: number;
  /** Fisher-z interval tanh(atanh r ± z/√(|P| − 3)), only for |P| ≥ 4. */
  lower: number | null;
  upper: number | null;
  reasons: IndexReason[];
}

/**
 * Agreement with the panel consensus (analyze contract; methods §2.4a): Pearson r over the
 * products the assessor rated that at least one other assessor rated too. Needs ≥ 3 products
 * ('few-products') and spread in both profiles ('no-spread').
 * Common practice, no single source; Fisher (1921) z transform for the interval.
 */
export function agreementCorrelation(table: CellTable, assessor: string, confidenceLevel = 0.95): AgreementCorrelation {
  const { r, nProducts, reasons } = agreementEstimate(table, assessor);
  if (r === null || nProducts < 4 || Math.abs(r) === 1) return { r, nProducts, lower: null, upper: null, reasons };
  const halfWidth = normalQuantile(1 - (1 - confidenceLevel) / 2) / Math.sqrt(nProducts - 3);
  const z = Math.atanh(r);
  return { r, nProducts, lower: Math.tanh(z - halfWidth), upper: Math.tanh(z + halfWidth), reasons: [] };
}

/** r alone (what the analyze contract prints), without the interval: same definition and reasons. */
export function agreementEstimate(table: CellTable, assessor: string): { r: number | null; nProducts: number; reasons: IndexReason[] } {
  const own: number[] = [];
  const others: number[] = [];
  for (const product of productsRatedBy(table, assessor)) {
    const rest = cellMeansOfProduct(table, product, assessor);
    if (rest.length === 0) continue;
    own.push(cellMean(table, assessor, product) as number);
    others.push(mean(rest));
  }
  const nProducts = own.length;
  if (nProducts < 3) return { r: null, nProducts, reasons: ['few-products'] };
  const r = pearsonCorrelation(own, others);
  if (Number.isNaN(r)) return { r: null, nProducts, reasons: ['no-spread'] };
  return { r, nProducts, reasons: [] };
}

/**
 * The assessor's share of the assessor × product interaction sum of squares (methods §2.4b,
 * balanced): SS_AP(a) = n Σ_p (ȳ_ap· − ȳ_a·· − ȳ_·p· + ȳ···)², share = SS_AP(a)/SS_AP (≈ 1/A expected).
 */
export function interactionShare(anova: BalancedAnova, assessorIndex: number): number | null {
  if (!(anova.interactionSumOfSquares > 0)) return null;
  let sum = 0;
  anova.cellMeans[assessorIndex].forEach((m, p) => {
    sum += (m - anova.assessorMeans[assessorIndex] - anova.productMeans[p] + anova.grandMean) ** 2;
  });
  return (anova.nReplicates * sum) / anova.interactionSumOfSquares;
}

export interface DisagreementTest {
  F: number | null;
  dfNumerator: number | null;
  dfDenominator: number | null;
  pValue: number | null;
  reasons: IndexReason[];
}

/**
 * Disagreement of one assessor with the rest (methods §2.4c, derived there and checked in R):
 * the interaction contrast "assessor a versus the mean of the others" × products,
 * SS_int(a) = n (A − 1)/A Σ_p (d_ap − L_a)² on P − 1 df, F = [SS_int(a)/(P − 1)] / MS_E on
 * (P − 1, A P (n − 1)). Balanced designs with replicates only ('unbalanced', 'no-replicates').
 */
export function disagreementTest(anova: BalancedAnova | null, assessorIndex: number): DisagreementTest {
  const none = { F: null, dfNumerator: null, dfDenominator: null, pValue: null };
  if (anova === null) return { ...none, reasons: ['unbalanced'] };
  if (anova.errorDf === 0) return { ...none, reasons: ['no-replicates'] };
  const { nAssessors: A, nProducts: P, nReplicates: n } = anova;
  if (A < 3) return { ...none, reasons: ['few-assessors'] };
  const errorMeanSquare = anova.errorSumOfSquares / anova.errorDf;
  if (!(errorMeanSquare > 0)) return { ...none, reasons: ['no-spread'] };
  const own = anova.cellMeans[assessorIndex];
  const differences = own.map((m, p) => m - (anova.productMeans[p] * A - m) / (A - 1));
  const looOffset = mean(differences);
  let sum = 0;
  for (const d of differences) sum += (d - looOffset) ** 2;
  const contrastSumOfSquares = ((n * (A - 1)) / A) * sum;
  const F = contrastSumOfSquares / (P - 1) / errorMeanSquare;
  return { F, dfNumerator: P - 1, dfDenominator: anova.errorDf, pValue: fUpperTail(F, P - 1, anova.errorDf), reasons: [] };
}
