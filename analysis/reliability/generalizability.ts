/**
 * Generalizability (reliability) coefficients of product means, and the variance-component forms
 * of ICC(2,1) and ICC(3,1), from the variance components of the per-session model.
 *
 * With σ²_P the variance of true product means, for a panel mean over A' assessors × n' replicates:
 *   relative (ranking) Eρ² = σ²_P / (σ²_P + σ²_AP/A' + σ²_E/(A'n')),
 *   absolute Φ = σ²_P / (σ²_P + (σ²_A + σ²_AP)/A' + σ²_E/(A'n')).
 * Without replicates (model M1) σ²_AP and σ²_E are not separable: pass the error variance as
 * `residual` with `assessorByProduct` 0 and n' = 1.
 * Single-assessor forms on the cell-mean scale (n replicates per cell):
 *   ICC(3,1) = σ²_P/(σ²_P + σ²_AP + σ²_E/n), ICC(2,1) = σ²_P/(σ²_P + σ²_A + σ²_AP + σ²_E/n).
 * In balanced data with σ̂²_P = (MS_P − MS_AP)/(A n) these equal the Shrout–Fleiss values on the
 * matrix of cell means (Eρ² = ICC(3,k) = 1 − 1/F_P).
 *
 * @see Cronbach, Gleser, Nanda & Rajaratnam (1972); Brennan (2001) Generalizability Theory; methods notes §4.1–4.2.
 */
export interface VarianceComponentsForReliability {
  /** σ²_P: variance of true product means. */
  product: number;
  /** σ²_A: assessor level variance. */
  assessor: number;
  /** σ²_AP: assessor × product interaction variance (0 in model M1). */
  assessorByProduct: number;
  /** σ²_E: replicate error variance (the M1 error when there are no replicates). */
  residual: number;
}

export interface GeneralizabilityResult {
  relativeCoefficient: number | null;
  absoluteCoefficient: number | null;
  iccConsistencySingle: number | null;
  iccAbsoluteSingle: number | null;
}

export function generalizabilityCoefficients(
  components: VarianceComponentsForReliability,
  design: { nAssessors: number; nReplicates: number },
): GeneralizabilityResult {
  const { product, assessor, assessorByProduct, residual } = components;
  for (const value of [product, assessor, assessorByProduct, residual]) {
    if (!(value >= 0)) throw new Error('generalizabilityCoefficients: variance components must be non-negative numbers');
  }
  const { nAssessors, nReplicates } = design;
  if (!(nAssessors > 0) || !(nReplicates > 0)) throw new Error('generalizabilityCoefficients: nAssessors and nReplicates must be positive');
  const ratio = (numerator: number, denominator: number) => (denominator > 0 ? numerator / denominator : null);
  const errorOfPanelMean = residual / (nAssessors * nReplicates);
  return {
    relativeCoefficient: ratio(product, product + assessorByProduct / nAssessors + errorOfPanelMean),
    absoluteCoefficient: ratio(product, product + (assessor + assessorByProduct) / nAssessors + errorOfPanelMean),
    iccConsistencySingle: ratio(product, product + assessorByProduct + residual / nReplicates),
    iccAbsoluteSingle: ratio(product, product + assessor + assessorByProduct + residual / nReplicates),
  };
}

/**
 * Decision study: assessors needed for a target relative coefficient c (Spearman–Brown form):
 * A' = (σ²_AP + σ²_E/n')/σ²_P · c/(1 − c) for target c, rounded up. null when σ²_P = 0.
 */
export function assessorsNeeded(components: VarianceComponentsForReliability, target: { coefficient: number; nReplicates: number }): number | null {
  if (!(target.coefficient > 0 && target.coefficient < 1)) throw new Error('assessorsNeeded: the target coefficient must lie strictly between 0 and 1');
  if (!(components.product > 0)) return null;
  const exact = ((components.assessorByProduct + components.residual / target.nReplicates) / components.product) * (target.coefficient / (1 - target.coefficient));
  // Guard against 3.0000000000000004 becoming 4.
  return Math.max(1, Math.ceil(exact - 1e-9));
}

/** σ̂²_P = (MS_P − MS_AP)/(A n) from a balanced ANOVA, truncated at 0 (methods §4.2). */
export function productVarianceFromMeanSquares(meanSquares: { product: number; assessorByProduct: number }, design: { nAssessors: number; nReplicates: number }): number {
  return Math.max(0, (meanSquares.product - meanSquares.assessorByProduct) / (design.nAssessors * design.nReplicates));
}
