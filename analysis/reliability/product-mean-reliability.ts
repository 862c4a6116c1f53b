/**
 * Reliability of one session's product means, from a stored session fit (no refit): the
 * generalizability coefficients of analysis/reliability/generalizability.ts with the product
 * variance estimated from the product F test.
 *
 * In a balanced design the product mean square is MS_P = A·n·s²(means) (s² over products, P − 1
 * denominator) and the F test's denominator mean square is MS_P / F, so σ̂²_P = (MS_P − MS_P/F)/(A n)
 * (productVarianceFromMeanSquares). With ANOVA-equal REML components the relative coefficient is
 * then 1 − 1/F, which is ICC(3,k) of the assessor × product matrix of cell means (McGraw & Wong
 * 1996, ICC(C,k); Shrout & Fleiss 1979, ICC(3,k)). Unbalanced sessions use the model's product
 * means and Satterthwaite F: an approximation, said so on the pages.
 */
import type { FitJson } from '../../domain/analysis.js';
import { generalizabilityCoefficients, productVarianceFromMeanSquares } from './generalizability.js';

export interface ProductMeanReliability {
  /** Eρ²: how reliably the panel mean ranks the products (0–1). */
  relativeCoefficient: number | null;
  /** Φ: agreement of the panel mean in absolute terms (assessor level differences count as error). */
  absoluteCoefficient: number | null;
  /** σ̂²_P, variance of true product means (scale units squared). */
  productVariance: number;
  /** Ratings per assessor × product cell, averaged over cells (n'). */
  replicatesPerCell: number;
}

function sampleVariance(values: readonly number[]): number {
  const mean = values.reduce((sum, v) => sum + v, 0) / values.length;
  return values.reduce((sum, v) => sum + (v - mean) ** 2, 0) / (values.length - 1);
}

/** null when the fit has no product F (one product, or no test) or no assessors. */
export function productMeanReliability(fit: FitJson): ProductMeanReliability | null {
  const F = fit.productTest.F;
  if (F === null || !(F > 0) || fit.productMeans.length < 2 || fit.assessors < 1 || fit.products < 1) return null;
  const replicatesPerCell = fit.n / (fit.assessors * fit.products);
  const meanSquareProduct = fit.assessors * replicatesPerCell * sampleVariance(fit.productMeans.map((m) => m.mean));
  const productVariance = productVarianceFromMeanSquares(
    { product: meanSquareProduct, assessorByProduct: meanSquareProduct / F },
    { nAssessors: fit.assessors, nReplicates: replicatesPerCell },
  );
  const g = generalizabilityCoefficients(
    {
      product: productVariance,
      assessor: Math.max(0, fit.variance.assessor),
      assessorByProduct: Math.max(0, fit.variance['assessor:product'] ?? 0),
      residual: Math.max(0, fit.variance.residual),
    },
    { nAssessors: fit.assessors, nReplicates: replicatesPerCell },
  );
  return { relativeCoefficient: g.relativeCoefficient, absoluteCoefficient: g.absoluteCoefficient, productVariance, replicatesPerCell };
}
