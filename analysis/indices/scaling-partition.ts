import { fUpperTail } from '../distributions/index.js';
import type { BalancedAnova } from './balanced-anova.js';

/**
 * Scaling/disagreement partition of the assessor × product interaction (methods §2.6; the
 * row-regression partition of Mandel 1961, as used in the mixed assessor model of Brockhoff,
 * Schlich & Skovgaard 2015). Balanced designs only:
 *   x_p = ȳ_·p· − ȳ···, S_xx = Σ x_p², β̂_a = Σ_p (ȳ_ap· − ȳ_a··) x_p / S_xx,
 *   SS_scal = n S_xx Σ_a (β̂_a − 1)² on A − 1 df, SS_D = SS_AP − SS_scal on (A − 1)(P − 2) df,
 *   F_scal = MS_scal/MS_D; F_D = MS_D/MS_E (with replicates); scaling-corrected product test
 *   F_P* = MS_P/MS_D on (P − 1, (A − 1)(P − 2)) next to the classical MS_P/MS_AP.
 * null when P < 3 (no disagreement df) or the product means have no spread.
 */
export interface ScalingPartition {
  scalingCoefficients: number[];
  interactionSumOfSquares: number;
  scalingSumOfSquares: number;
  scalingDf: number;
  disagreementSumOfSquares: number;
  disagreementDf: number;
  disagreementMeanSquare: number;
  scalingF: number | null;
  scalingP: number | null;
  /** MS_D/MS_E, null without replicates. */
  disagreementF: number | null;
  disagreementP: number | null;
  productFClassic: number | null;
  productDfDenominatorClassic: number;
  productPClassic: number | null;
  productFCorrected: number | null;
  productDfDenominatorCorrected: number;
  productPCorrected: number | null;
}

export function scalingDisagreementPartition(anova: BalancedAnova): ScalingPartition | null {
  const { nAssessors: A, nProducts: P, nReplicates: n } = anova;
  if (P < 3) return null;
  const x = anova.productMeans.map((m) => m - anova.grandMean);
  const sxx = x.reduce((sum, value) => sum + value * value, 0);
  if (!(sxx > 0)) return null;
  const scalingCoefficients = anova.cellMeans.map((row, a) => row.reduce((sum, m, p) => sum + (m - anova.assessorMeans[a]) * x[p], 0) / sxx);
  const scalingSumOfSquares = n * sxx * scalingCoefficients.reduce((sum, beta) => sum + (beta - 1) ** 2, 0);
  const scalingDf = A - 1;
  const disagreementSumOfSquares = anova.interactionSumOfSquares - scalingSumOfSquares;
  const disagreementDf = (A - 1) * (P - 2);
  const disagreementMeanSquare = disagreementSumOfSquares / disagreementDf;
  const ratio = (numerator: number, denominator: number) => (denominator > 0 ? numerator / denominator : null);
  const scalingF = ratio(scalingSumOfSquares / scalingDf, disagreementMeanSquare);
  const errorMeanSquare = anova.errorDf > 0 ? anova.errorSumOfSquares / anova.errorDf : 0;
  const disagreementF = anova.errorDf > 0 ? ratio(disagreementMeanSquare, errorMeanSquare) : null;
  const productMeanSquare = anova.productSumOfSquares / anova.productDf;
  const productFClassic = ratio(productMeanSquare, anova.interactionSumOfSquares / anova.interactionDf);
  const productFCorrected = ratio(productMeanSquare, disagreementMeanSquare);
  return {
    scalingCoefficients,
    interactionSumOfSquares: anova.interactionSumOfSquares,
    scalingSumOfSquares,
    scalingDf,
    disagreementSumOfSquares,
    disagreementDf,
    disagreementMeanSquare,
    scalingF,
    scalingP: scalingF === null ? null : fUpperTail(scalingF, scalingDf, disagreementDf),
    disagreementF,
    disagreementP: disagreementF === null ? null : fUpperTail(disagreementF, disagreementDf, anova.errorDf),
    productFClassic,
    productDfDenominatorClassic: anova.interactionDf,
    productPClassic: productFClassic === null ? null : fUpperTail(productFClassic, anova.productDf, anova.interactionDf),
    productFCorrected,
    productDfDenominatorCorrected: disagreementDf,
    productPCorrected: productFCorrected === null ? null : fUpperTail(productFCorrected, anova.productDf, disagreementDf),
  };
}
