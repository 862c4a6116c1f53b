/**
 * Second-order pieces of the profiled criterion from a factor (criterion-factor.ts): the
 * average information (a start Hessian for the optimiser) and what the exact Hessian in γ = θ²
 * and the exact derivatives of cov(β̂) need (the Satterthwaite step, satterthwaite.ts).
 *
 * Harville 1977, JASA 72:320, eqs. for the REML information [from memory]; checked in the tests
 * against differences of the analytic gradient. With H = I + Σ γ_k Z_k Z_kᵀ, P its REML
 * projection (ML: with the fixed effects profiled out of the quadratic form only), G_k = Z_k Z_kᵀ
 * and T as in criterion-gradient.ts:
 *
 *   ∂²h/∂γ_k∂γ_l = −tr(P G_k P G_l) + 2 yᵀP G_k P G_l P y / σ²,
 *   γ_k γ_l tr(P G_k P G_l) = ‖δ_kl I − T_kl‖²_F   (from Λ Zᵀ P Z Λ = I − T),
 *   ∂(R_Xᵀ R_X)⁻¹/∂θ_k = (2/θ_k) C F_kᵀ F_k C, C = (R_Xᵀ R_X)⁻¹, F = L⁻ᵀ R_ZX = Λ Zᵀ H⁻¹ X,
 *
 * F_k its rows of term k. Terms with θ_k = 0 get zeros where a division by θ_k would be needed.
 */
import { blockArrowBackSolveRows } from '../linalg/block-arrow.js';
import { forwardSolveInPlace, inverseFromCholesky } from '../linalg/dense.js';
import type { CriterionFactor, CriterionParts, CriterionSetting } from './criterion-factor.js';
import { gradientPiecesOf, type GradientScratch } from './criterion-gradient.js';
import { makeResidualProjector, type ResidualProjector } from './criterion-projection.js';
import { traceProductsFromFactor } from './criterion-trace-products.js';

export interface SecondOrderPieces {
  parts: CriterionParts;
  /** tr T_kk per term (as gradientPieces). */
  traceT: Float64Array;
  /** ‖u_k‖² per term (as gradientPieces). */
  modeSquares: Float64Array;
  /** ‖δ_kl I − T_kl‖²_F, row-major nTheta×nTheta. */
  traceProducts: Float64Array;
  /** yᵀ P G_k P G_l P y (σ-free), row-major nTheta×nTheta. */
  residualProducts: Float64Array;
  /** ‖Z_kᵀ P y‖² per term. */
  residualTermSquares: Float64Array;
  /** (R_Xᵀ R_X)⁻¹ at θ. */
  unscaledCovBeta: Float64Array;
  /** ∂(R_Xᵀ R_X)⁻¹/∂θ_k per term, row-major p×p (zeros where θ_k = 0). */
  unscaledCovBetaDerivatives: Float64Array[];
}

/** The second-order computations of one objective, with their observation-level work arrays. */
export interface SecondOrder {
  /**
   * The average-information approximation of the Hessian of the REML criterion in γ at the
   * factor's θ (row-major k×k). With r = Py, w_k = Z_k Z_kᵀ r, s_k = ‖Z_kᵀ r‖² and ν = n − p:
   * ν wₖᵀ P w_l / pwrss − ν s_k s_l / pwrss² (the profiled expected information with the traces
   * replaced by their data versions; Gilmour, Thompson & Cullis 1995, Biometrics 51:1440 [from
   * memory]). Null for ML objectives and where the criterion is not finite.
   */
  averageInformation(factor: CriterionFactor | null): Float64Array | null;
  secondOrderPieces(factor: CriterionFactor | null): SecondOrderPieces | null;
}

export function makeSecondOrder(setting: CriterionSetting, gradientScratch: GradientScratch): SecondOrder {
  const { frame, reml } = setting;
  const nTheta = frame.terms.length;
  let projector: ResidualProjector | null = null;
  // Made on first use: a fit that never asks for second-order pieces needs no observation-level arrays.
  const project = (): ResidualProjector => (projector ??= makeResidualProjector(setting));

  function averageInformation(factor: CriterionFactor | null): Float64Array | null {
    if (!reml || !factor || !Number.isFinite(factor.parts.deviance)) return null;
    const { termSquares: s, products } = project().residualCrossProducts(factor);
    const information = new Float64Array(nTheta * nTheta);
    const nu = setting.degreesOfFreedom;
    const pwrss = factor.parts.pwrss;
    for (let l = 0; l < nTheta; l++) {
      for (let k = 0; k <= l; k++) {
        const value = (nu * products[k * nTheta + l]) / pwrss - (nu * s[k] * s[l]) / (pwrss * pwrss);
        information[k * nTheta + l] = value;
        information[l * nTheta + k] = value;
      }
    }
    return information;
  }

  function secondOrderPieces(factor: CriterionFactor | null): SecondOrderPieces | null {
    const pieces = factor && gradientPiecesOf(setting, factor, gradientScratch);
    if (!factor || !pieces) return null;
    const q = frame.layout.size;
    const p = frame.nFixed;
    const width = p + 1;
    // F = L⁻ᵀ R_ZX, and its rows through R_X⁻ᵀ (the fixed part of T, REML only).
    const f = new Float64Array(q * p);
    for (let i = 0; i < q; i++) for (let c = 0; c < p; c++) f[i * p + c] = factor.fixedRows[i * width + c];
    blockArrowBackSolveRows(factor.arrow, f, p);
    let fixedPart: Float64Array | null = null;
    if (reml) {
      fixedPart = f.slice();
      for (let i = 0; i < q; i++) forwardSolveInPlace(factor.rx, p, fixedPart, i * p);
    }
    const traceProducts = traceProductsFromFactor(frame, factor, fixedPart);
    const { termSquares, products } = project().residualCrossProducts(factor);
    const unscaledCovBeta = inverseFromCholesky(factor.rx, p);
    const unscaledCovBetaDerivatives = Array.from({ length: nTheta }, () => new Float64Array(p * p));
    const cf = new Float64Array(p);
    const theta = factor.theta;
    for (let i = 0; i < q; i++) {
      const k = frame.termOfPosition[i];
      if (!(theta[k] > 0)) continue;
      for (let a = 0; a < p; a++) {
        let sum = 0;
        for (let c = 0; c < p; c++) sum += unscaledCovBeta[a * p + c] * f[i * p + c];
        cf[a] = sum;
      }
      const target = unscaledCovBetaDerivatives[k];
      const scale = 2 / theta[k];
      for (let a = 0; a < p; a++) for (let c = 0; c < p; c++) target[a * p + c] += scale * cf[a] * cf[c];
    }
    return {
      parts: pieces.parts,
      traceT: pieces.traceT,
      modeSquares: pieces.modeSquares,
      traceProducts,
      residualProducts: products,
      residualTermSquares: termSquares,
      unscaledCovBeta,
      unscaledCovBetaDerivatives,
    };
  }

  return { averageInformation, secondOrderPieces };
}
