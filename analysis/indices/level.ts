import { tTwoSidedP } from '../distributions/index.js';
import { mean } from '../descriptive/mean.js';
import { sampleVariance } from '../descriptive/sample-variance.js';
import type { BalancedAnova } from './balanced-anova.js';
import { cellMean, cellMeansOfProduct, productsRatedBy, type CellTable } from './cell-table.js';
import type { IndexReason } from './types.js';

export interface LevelTest {
  /** L_a = mean over products of d_ap = m_ap − m_(−a)p (leave-one-out panel). */
  looOffset: number | null;
  t: number | null;
  df: number | null;
  pValue: number | null;
  nProducts: number;
  reasons: IndexReason[];
}

/**
 * Level test against the leave-one-out panel (methods §2.1, primary form): paired t over the
 * products rated by the assessor and by at least two other assessors, t = L_a/(sd(d)/√|P|),
 * df = |P| − 1, two-sided. The assessor's own interaction is the error, so it does not assume all
 * assessors disagree equally. Needs ≥ 3 such products ('few-products'); sd(d) = 0 gives no test
 * ('no-spread', the scale resolution is not known here).
 * @see Student (1908) for the paired t test; its use here is common practice.
 */
export function pairedLevelTest(table: CellTable, assessor: string): LevelTest {
  const differences: number[] = [];
  for (const product of productsRatedBy(table, assessor)) {
    const others = cellMeansOfProduct(table, product, assessor);
    if (others.length < 2) continue;
    differences.push((cellMean(table, assessor, product) as number) - mean(others));
  }
  const nProducts = differences.length;
  const looOffset = nProducts > 0 ? mean(differences) : null;
  if (nProducts < 3) return { looOffset, t: null, df: null, pValue: null, nProducts, reasons: ['few-products'] };
  const sdDifference = Math.sqrt(sampleVariance(differences));
  if (!(sdDifference > 0)) return { looOffset, t: null, df: null, pValue: null, nProducts, reasons: ['no-spread'] };
  const t = (looOffset as number) / (sdDifference / Math.sqrt(nProducts));
  const df = nProducts - 1;
  return { looOffset, t, df, pValue: tTwoSidedP(t, df), nProducts, reasons: [] };
}

/**
 * Pooled level test (methods §2.1, secondary form, balanced designs only):
 * t' = L_a / √(MS_AP · A/(n P (A − 1))) on (A − 1)(P − 1) df; more powerful when interaction
 * variances are homogeneous. `anova` from balancedAnova (null → 'unbalanced').
 */
export function pooledLevelTest(anova: BalancedAnova | null, assessorIndex: number): { t: number | null; df: number | null; pValue: number | null; reasons: IndexReason[] } {
  if (anova === null) return { t: null, df: null, pValue: null, reasons: ['unbalanced'] };
  const { nAssessors: A, nProducts: P, nReplicates: n } = anova;
  if (A < 3) return { t: null, df: null, pValue: null, reasons: ['few-assessors'] };
  const interactionMeanSquare = anova.interactionSumOfSquares / anova.interactionDf;
  if (!(interactionMeanSquare > 0)) return { t: null, df: null, pValue: null, reasons: ['no-spread'] };
  // Balanced: L_a = A/(A − 1) (ȳ_a·· − ȳ···).
  const looOffset = (A / (A - 1)) * (anova.assessorMeans[assessorIndex] - anova.grandMean);
  const t = looOffset / Math.sqrt((interactionMeanSquare * A) / (n * P * (A - 1)));
  return { t, df: anova.interactionDf, pValue: tTwoSidedP(t, anova.interactionDf), reasons: [] };
}
