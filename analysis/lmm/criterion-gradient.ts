/**
 * The gradient of the profiled criterion from a factor (criterion-factor.ts), with respect to
 * γ_k = θ_k². With T = the random-effects block of the inverse of the (spherical) mixed-model
 * matrix and u the spherical modes, for any fixed σ:
 *
 *   ∂(log|L|² + log|R_X|² + pwrss/σ²)/∂γ_k = (q_k − tr T_kk − ‖u_k‖²/σ²)/γ_k,  ∂pwrss/∂γ_k = −‖u_k‖²/γ_k
 *
 * (from Λ Zᵀ P Z Λ = I − T and Zᵀ P y = u/θ; Henderson's mixed-model equations, e.g. Searle,
 * Casella & McCulloch 1992, ch. 6 [chapter from memory]).
 */
import { blockArrowBackSolveRows, blockArrowInverseDiagonalAll } from '../linalg/block-arrow.js';
import { forwardSolveInPlace } from '../linalg/dense.js';
import { fixedEffectsAndModes, type CriterionFactor, type CriterionParts, type CriterionSetting } from './criterion-factor.js';

export interface GradientPieces {
  parts: CriterionParts;
  /** tr T_kk per term. */
  traceT: Float64Array;
  /** ‖u_k‖² per term. */
  modeSquares: Float64Array;
}

/** Work vectors of one objective's gradients, and the pieces of the last factor asked for. */
export interface GradientScratch {
  inverseDiagonal: Float64Array;
  modes: Float64Array;
  fixedRows: Float64Array;
  rowBuffer: Float64Array;
  /**
   * Factors never change, so their pieces can be kept: the Satterthwaite step at θ̂ then reuses
   * the optimiser's last gradient instead of a second inverse diagonal.
   */
  last?: { factor: CriterionFactor; pieces: GradientPieces | null };
}

export function makeGradientScratch(setting: CriterionSetting): GradientScratch {
  const q = setting.frame.layout.size;
  const p = setting.frame.nFixed;
  return { inverseDiagonal: new Float64Array(q), modes: new Float64Array(q), fixedRows: new Float64Array(q * p), rowBuffer: new Float64Array(p) };
}

/**
 * tr T_kk and ‖u_k‖² per term; null where the criterion is not finite at the factor's θ. The
 * result is shared with later calls for the same factor: read it, do not change it.
 */
export function gradientPiecesOf(setting: CriterionSetting, factor: CriterionFactor, scratch: GradientScratch): GradientPieces | null {
  if (scratch.last?.factor !== factor) scratch.last = { factor, pieces: computeGradientPieces(setting, factor, scratch) };
  return scratch.last.pieces;
}

function computeGradientPieces(setting: CriterionSetting, factor: CriterionFactor, scratch: GradientScratch): GradientPieces | null {
  if (!Number.isFinite(factor.parts.deviance)) return null;
  const { frame, reml } = setting;
  const q = frame.layout.size;
  const p = frame.nFixed;
  const width = p + 1;
  const { inverseDiagonal, modes, fixedRows, rowBuffer } = scratch;
  fixedEffectsAndModes(setting, factor, modes);
  blockArrowInverseDiagonalAll(factor.arrow, inverseDiagonal);
  setting.inverseScratch.value ??= factor.arrow.inverseScratch;
  if (reml) {
    // Fixed-effect part of T: rows g_i of L⁻ᵀ R_ZX, contribution ‖L_X⁻¹ g_i‖².
    for (let i = 0; i < q; i++) for (let c = 0; c < p; c++) fixedRows[i * p + c] = factor.fixedRows[i * width + c];
    blockArrowBackSolveRows(factor.arrow, fixedRows, p);
    for (let i = 0; i < q; i++) {
      for (let c = 0; c < p; c++) rowBuffer[c] = fixedRows[i * p + c];
      forwardSolveInPlace(factor.rx, p, rowBuffer);
      let sum = 0;
      for (let c = 0; c < p; c++) sum += rowBuffer[c] * rowBuffer[c];
      inverseDiagonal[i] += sum;
    }
  }
  const nTheta = frame.terms.length;
  const traceT = new Float64Array(nTheta);
  const modeSquares = new Float64Array(nTheta);
  for (let i = 0; i < q; i++) {
    const k = frame.termOfPosition[i];
    traceT[k] += inverseDiagonal[i];
    modeSquares[k] += modes[i] * modes[i];
  }
  return { parts: factor.parts, traceT, modeSquares };
}

/** The criterion and its gradient in γ (NaN where θ_k = 0: the caller takes that slope by differences). */
export function valueAndGradientOf(
  setting: CriterionSetting,
  factor: CriterionFactor | null,
  scratch: GradientScratch,
): { value: number; gradient: Float64Array } {
  const nTheta = setting.frame.terms.length;
  const gradient = new Float64Array(nTheta).fill(Number.NaN);
  const pieces = factor && gradientPiecesOf(setting, factor, scratch);
  if (!factor || !pieces) return { value: Infinity, gradient };
  const sigma2 = pieces.parts.pwrss / setting.degreesOfFreedom;
  for (let k = 0; k < nTheta; k++) {
    const gamma = factor.theta[k] * factor.theta[k];
    if (gamma > 0) gradient[k] = (setting.frame.terms[k].levels.length - pieces.traceT[k] - pieces.modeSquares[k] / sigma2) / gamma;
  }
  return { value: pieces.parts.deviance, gradient };
}
