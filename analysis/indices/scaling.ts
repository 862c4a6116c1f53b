import { fUpperTail, tTwoSidedP } from '../distributions/index.js';
import { mean } from '../descriptive/mean.js';
import type { BalancedAnova } from './balanced-anova.js';
import { cellMean, panelMean, productsRatedBy, type CellTable } from './cell-table.js';
import type { IndexReason } from './types.js';

export interface ScalingResult {
  /** β̂_a = cov(m_ap, M_p)/var(M_p) over the assessor's products (analyze contract). */
  scaling: number | null;
  nProducts: number;
  /** s_D,a: SD of the residuals of m_ap on M_p after scaling, on P_a − 2 df. */
  disagreementSd: number | null;
  /** t test of β = 1: t = (β̂ − 1)/(s_D/√S_xx), df = P_a − 2, two-sided. */
  t: number | null;
  df: number | null;
  pValue: number | null;
  /** Disagreement after scaling vs pure error (balanced, replicates): F = n s²_D/MS_E on (P − 2, AP(n − 1)). */
  disagreementF: number | null;
  disagreementP: number | null;
  reasons: IndexReason[];
}

export interface ScalingOptions {
  /**
   * p-value of the panel's product test for this session and attribute. When given and not
   * below `panelAlpha`, the β = 1 test is withheld ('panel-not-discriminating'): the panel profile
   * is then mostly noise and β̂ cannot be read. When absent the test is computed regardless.
   */
  panelProductPValue?: number | null;
  panelAlpha?: number;
}

/**
 * Individual scaling coefficient (Brockhoff & Skovgaard 1994 assessor model y = μ_a + β_a ν_p + ε,
 * least squares with the panel profile plugged in; methods §2.5). Regression of the assessor's
 * cell means on the panel means M_p over the products P_a the assessor rated:
 * β̂ = Σ (m_ap − m̄_a)(M_p − M̄)/S_xx, S_xx = Σ (M_p − M̄)². In a balanced design this is the β̂_a of
 * the methods notes and Σ_a β̂_a = A.
 * scaling needs ≥ 2 products ('few-products') and var(M_p) > 0 ('no-spread'); the tests need
 * P_a ≥ 4 (methods' minimum) and residual spread.
 */
export function scalingCoefficient(table: CellTable, assessor: string, anova: BalancedAnova | null, options: ScalingOptions = {}): ScalingResult {
  const estimate = scalingEstimate(table, assessor);
  const { nProducts } = estimate;
  const result: ScalingResult = { scaling: null, nProducts, disagreementSd: null, t: null, df: null, pValue: null, disagreementF: null, disagreementP: null, reasons: [] };
  if (estimate.scaling === null) return { ...result, reasons: estimate.reasons };
  const { scaling, own, panel, ownMean, panelMeanOfMeans, sxx, syy } = estimate;
  if (nProducts < 4) return { ...result, scaling, reasons: ['few-products'] };
  let residualSumOfSquares = 0;
  for (let i = 0; i < nProducts; i++) residualSumOfSquares += (own[i] - ownMean - scaling * (panel[i] - panelMeanOfMeans)) ** 2;
  // An exact fit leaves rounding dust, not spread: treat it as 0 so t is not ±1e16.
  if (residualSumOfSquares <= 1e-24 * syy) residualSumOfSquares = 0;
  const df = nProducts - 2;
  const disagreementSd = Math.sqrt(residualSumOfSquares / df);
  const reasons: IndexReason[] = [];
  let t: number | null = null;
  let pValue: number | null = null;
  const panelAlpha = options.panelAlpha ?? 0.05;
  const gated = options.panelProductPValue !== undefined && !(options.panelProductPValue !== null && options.panelProductPValue < panelAlpha);
  if (gated) reasons.push('panel-not-discriminating');
  else if (!(disagreementSd > 0)) reasons.push('no-spread');
  else {
    t = (scaling - 1) / (disagreementSd / Math.sqrt(sxx));
    pValue = tTwoSidedP(t, df);
  }
  let disagreementF: number | null = null;
  let disagreementP: number | null = null;
  if (anova !== null && anova.errorDf > 0 && anova.errorSumOfSquares > 0) {
    disagreementF = (anova.nReplicates * disagreementSd * disagreementSd) / (anova.errorSumOfSquares / anova.errorDf);
    disagreementP = fUpperTail(disagreementF, df, anova.errorDf);
  }
  return { scaling, nProducts, disagreementSd, t, df, pValue, disagreementF, disagreementP, reasons };
}

interface ScalingEstimate {
  scaling: number | null;
  nProducts: number;
  own: number[];
  panel: number[];
  ownMean: number;
  panelMeanOfMeans: number;
  sxx: number;
  syy: number;
  reasons: IndexReason[];
}

/** β̂_a alone (what the analyze contract prints) and the sums the β = 1 test goes on from. */
export function scalingEstimate(table: CellTable, assessor: string): ScalingEstimate {
  const products = productsRatedBy(table, assessor);
  const own = products.map((product) => cellMean(table, assessor, product) as number);
  const panel = products.map((product) => panelMean(table, product) as number);
  const nProducts = products.length;
  const none = { scaling: null, nProducts, own, panel, ownMean: Number.NaN, panelMeanOfMeans: Number.NaN, sxx: 0, syy: 0 };
  if (nProducts < 2) return { ...none, reasons: ['few-products'] };
  const ownMean = mean(own);
  const panelMeanOfMeans = mean(panel);
  let sxx = 0;
  let sxy = 0;
  let syy = 0;
  for (let i = 0; i < nProducts; i++) {
    const dx = panel[i] - panelMeanOfMeans;
    const dy = own[i] - ownMean;
    sxx += dx * dx;
    sxy += dx * dy;
    syy += dy * dy;
  }
  if (!(sxx > 0)) return { ...none, reasons: ['no-spread'] };
  return { scaling: sxy / sxx, nProducts, own, panel, ownMean, panelMeanOfMeans, sxx, syy, reasons: [] };
}
