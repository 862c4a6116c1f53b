/**
 * Stage 2 of a fit: the profiled REML (or ML) criterion as a function of the relative standard
 * deviations θ_k = σ_k/σ, in named stages:
 * - criterion-factor.ts: the factorisation at θ (lme4's formulas), an immutable factor;
 * - criterion-gradient.ts: the analytic gradient in γ = θ² from a factor;
 * - criterion-second-order.ts (with criterion-projection.ts, criterion-trace-products.ts): the
 *   average information and the pieces of the exact Hessian and of ∂cov(β̂)/∂θ;
 * - criterion-solution.ts: fixed effects, modes, cov(β̂) and conditional variances.
 * This module puts them behind one objective and keeps the last factor, so a result assembled
 * right after the optimiser's last evaluation at the same θ reuses it.
 */
import { factorCriterion, FAILED_PARTS, makeCriterionSetting, type CriterionFactor, type CriterionParts } from './criterion-factor.js';
import { gradientPiecesOf, makeGradientScratch, valueAndGradientOf } from './criterion-gradient.js';
import { makeSecondOrder, type SecondOrderPieces } from './criterion-second-order.js';
import { solutionFromFactor, type MixedModelSolution } from './criterion-solution.js';
import { inverseFromCholesky } from '../linalg/dense.js';
import type { ModelFrame } from './model-frame.js';

export type { CriterionParts } from './criterion-factor.js';
export type { MixedModelSolution } from './criterion-solution.js';
export type { SecondOrderPieces } from './criterion-second-order.js';

export interface RemlObjective {
  frame: ModelFrame;
  reml: boolean;
  nTheta: number;
  /** The criterion at θ (Infinity when a factorisation fails). */
  evaluate(theta: ArrayLike<number>): number;
  parts(theta: ArrayLike<number>): CriterionParts;
  solve(theta: ArrayLike<number>): MixedModelSolution;
  /**
   * The criterion and its gradient with respect to γ_k = θ_k², for θ_k > 0 (NaN where θ_k = 0,
   * whose one-sided slope the caller takes by differences): ∂f/∂γ_k = (q_k − tr T_kk − ‖u_k‖²/σ̂²)/γ_k
   * (criterion-gradient.ts).
   */
  valueAndGradient(theta: ArrayLike<number>): { value: number; gradient: Float64Array };
  /**
   * The pieces of the gradient at θ: tr T_kk and ‖u_k‖² per term. For any fixed σ,
   * ∂(log|L|² + log|R_X|² + pwrss/σ²)/∂γ_k = (q_k − tr T_kk − ‖u_k‖²/σ²)/γ_k and
   * ∂pwrss/∂γ_k = −‖u_k‖²/γ_k. Null where the factorisation fails.
   */
  gradientPieces(theta: ArrayLike<number>): { parts: CriterionParts; traceT: Float64Array; modeSquares: Float64Array } | null;
  /**
   * The average-information approximation of the Hessian of the REML criterion in γ = θ² at θ
   * (row-major k×k; REML objectives only), null where the factorisation fails (see
   * criterion-second-order.ts). Only a start Hessian for the optimiser: it does not decide where the fit stops.
   */
  averageInformation(theta: ArrayLike<number>): Float64Array | null;
  /**
   * Everything the exact Hessian of h(θ) = log|L|² (+ log|R_X|²) + pwrss/σ² and the exact
   * derivatives of cov(β̂) need, from one factorisation at θ (null where it fails). See
   * SecondOrderPieces; the caller combines them for the θ_k > 0 it wants.
   */
  secondOrderPieces(theta: ArrayLike<number>): SecondOrderPieces | null;
  /** (R_Xᵀ R_X)⁻¹ at θ: cov(β̂) = σ² × this. */
  unscaledCovBeta(theta: ArrayLike<number>): Float64Array;
  /** parts(θ) and unscaledCovBeta(θ) from one factorisation. */
  partsAndCovBeta(theta: ArrayLike<number>): { parts: CriterionParts; unscaledCovBeta: Float64Array };
}

export function makeRemlObjective(frame: ModelFrame, options: { reml?: boolean } = {}): RemlObjective {
  const reml = options.reml ?? true;
  const setting = makeCriterionSetting(frame, reml);
  const nTheta = frame.terms.length;
  const gradientScratch = makeGradientScratch(setting);
  const secondOrder = makeSecondOrder(setting, gradientScratch);

  // The last θ factorised and its factor (null where the factorisation failed).
  let lastTheta: Float64Array | null = null;
  let lastFactor: CriterionFactor | null = null;

  function factorAt(theta: ArrayLike<number>): CriterionFactor | null {
    if (theta.length !== nTheta) throw new Error(`expected ${nTheta} relative SDs, got ${theta.length}`);
    if (lastTheta) {
      let same = true;
      for (let k = 0; k < nTheta; k++) if (lastTheta[k] !== theta[k]) same = false;
      if (same) return lastFactor;
    }
    lastFactor = factorCriterion(setting, theta);
    lastTheta = Float64Array.from(theta);
    return lastFactor;
  }

  const parts = (theta: ArrayLike<number>): CriterionParts => factorAt(theta)?.parts ?? { ...FAILED_PARTS };

  /** The factor at θ where the criterion is finite there; throws otherwise. */
  function finiteFactor(theta: ArrayLike<number>): CriterionFactor {
    const factor = factorAt(theta);
    if (!factor || !Number.isFinite(factor.parts.deviance)) throw new Error('the mixed-model equations are singular at these parameters');
    return factor;
  }

  return {
    frame,
    reml,
    nTheta,
    evaluate: (theta) => parts(theta).deviance,
    parts,
    solve: (theta) => solutionFromFactor(setting, finiteFactor(theta)),
    valueAndGradient: (theta) => valueAndGradientOf(setting, factorAt(theta), gradientScratch),
    gradientPieces(theta) {
      const factor = factorAt(theta);
      return factor && gradientPiecesOf(setting, factor, gradientScratch);
    },
    averageInformation: (theta) => secondOrder.averageInformation(factorAt(theta)),
    secondOrderPieces: (theta) => secondOrder.secondOrderPieces(factorAt(theta)),
    unscaledCovBeta(theta) {
      const factor = factorAt(theta);
      if (!factor) throw new Error('the mixed-model equations are singular at these parameters');
      return inverseFromCholesky(factor.rx, frame.nFixed);
    },
    partsAndCovBeta(theta) {
      const factor = finiteFactor(theta);
      return { parts: factor.parts, unscaledCovBeta: inverseFromCholesky(factor.rx, frame.nFixed) };
    },
  };
}
