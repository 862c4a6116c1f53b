/**
 * The factorisation behind the profiled REML (or ML) criterion at one θ, as lme4 does it
 * (Bates et al. 2015, J. Stat. Softw. 67(1), section 3): with Λ = diag(θ) over the random effects,
 *
 *   L Lᵀ = Λ ZᵀZ Λ + I,  R_ZX = L⁻¹ Λ ZᵀX,  R_Xᵀ R_X = XᵀX − R_ZXᵀ R_ZX,
 *   c_u = L⁻¹ Λ Zᵀy,  c_β = R_X⁻ᵀ (Xᵀy − R_ZXᵀ c_u),  pwrss = yᵀy − ‖c_u‖² − ‖c_β‖²,
 *   REML: log|L|² + log|R_X|² + (n − p)(1 + log(2π pwrss/(n − p)))   (lme4's REMLcrit)
 *   ML:   log|L|² + n(1 + log(2π pwrss/n))                          (lme4's deviance)
 *
 * θ_k = 0 is allowed (the term drops out), which is how boundary fits are represented.
 * All work is q×q in block-arrow form (see linalg/block-arrow.ts); nothing is N×N.
 * A factor is made once and never changed afterwards: the gradient, the second-order pieces and
 * the solution only read it, so a result can keep its factor while the search goes on.
 */
import {
  blockArrowBackSolve,
  blockArrowForwardSolveRows,
  blockArrowLogDeterminant,
  factorBlockArrowInPlace,
  makeBlockArrowWorkspace,
  type BlockArrowWorkspace,
  type InverseScratch,
} from '../linalg/block-arrow.js';
import { backSolveTransposeInPlace, choleskyInPlace, choleskyLogDeterminant, forwardSolveInPlace } from '../linalg/dense.js';
import type { ModelFrame } from './model-frame.js';

export interface CriterionParts {
  /** REMLcrit (reml) or deviance (ML), −2 × the profiled log-likelihood. */
  deviance: number;
  /** log|L|² = log det(Λ ZᵀZ Λ + I). */
  logDetL: number;
  /** log|R_X|² = log det(XᵀV⁻¹X σ²). */
  logDetRX: number;
  /** Penalised weighted residual sum of squares. */
  pwrss: number;
}

/** What every criterion at one θ shares: the frame, REML or ML, and n − p (REML) or n (ML). */
export interface CriterionSetting {
  frame: ModelFrame;
  reml: boolean;
  degreesOfFreedom: number;
  /**
   * Work arrays of the inverse diagonal (made by the first gradient), shared by every factor of
   * one objective: they hold nothing between calls, and a gradient should not allocate them afresh.
   */
  inverseScratch: { value?: InverseScratch };
}

/** The factorisation at θ, read-only once made. */
export interface CriterionFactor {
  readonly theta: Float64Array;
  /** Λ's diagonal: θ of each random-effect position's term. */
  readonly lambda: Float64Array;
  /** L in block-arrow form. */
  readonly arrow: BlockArrowWorkspace;
  /** [R_ZX | c_u], row-major q × (p + 1). */
  readonly fixedRows: Float64Array;
  /** R_Xᵀ as a lower Cholesky factor, row-major p × p. */
  readonly rx: Float64Array;
  /** c_β. */
  readonly cBeta: Float64Array;
  readonly parts: CriterionParts;
}

export function makeCriterionSetting(frame: ModelFrame, reml: boolean): CriterionSetting {
  const degreesOfFreedom = reml ? frame.nObservations - frame.nFixed : frame.nObservations;
  if (degreesOfFreedom <= 0) throw new Error('too few observations for the fixed effects');
  return { frame, reml, degreesOfFreedom, inverseScratch: {} };
}

/** The factor at θ, or null where Λ ZᵀZ Λ + I or R_Xᵀ R_X is not positive definite (numerically). */
export function factorCriterion(setting: CriterionSetting, thetaInput: ArrayLike<number>): CriterionFactor | null {
  const { frame } = setting;
  const { layout, nFixed: p } = frame;
  const nTheta = frame.terms.length;
  if (thetaInput.length !== nTheta) throw new Error(`expected ${nTheta} relative SDs, got ${thetaInput.length}`);
  const theta = Float64Array.from(thetaInput);
  const q = layout.size;
  const nB = layout.borderSize;
  const lambda = new Float64Array(q);
  for (let i = 0; i < q; i++) lambda[i] = theta[frame.termOfPosition[i]];
  const arrow = makeBlockArrowWorkspace(layout);
  if (setting.inverseScratch.value) arrow.inverseScratch = setting.inverseScratch.value;
  for (let b = 0; b < layout.blockSizes.length; b++) {
    const nb = layout.blockSizes[b];
    const offset = layout.blockOffsets[b];
    const source = frame.zTzBlocks[b];
    const target = arrow.blocks[b];
    for (let i = 0; i < nb; i++) {
      const li = lambda[offset + i];
      for (let j = 0; j < nb; j++) target[i * nb + j] = li * lambda[offset + j] * source[i * nb + j];
      target[i * nb + i] += 1;
    }
    const sourceCoupling = frame.zTzCouplings[b];
    const targetCoupling = arrow.couplings[b];
    for (let i = 0; i < nb; i++) {
      const li = lambda[offset + i];
      for (let j = 0; j < nB; j++) targetCoupling[i * nB + j] = li * lambda[layout.borderOffset + j] * sourceCoupling[i * nB + j];
    }
  }
  for (let i = 0; i < nB; i++) {
    const li = lambda[layout.borderOffset + i];
    for (let j = 0; j < nB; j++) arrow.border[i * nB + j] = li * lambda[layout.borderOffset + j] * frame.zTzBorder[i * nB + j];
    arrow.border[i * nB + i] += 1;
  }
  if (!factorBlockArrowInPlace(arrow)) return null;

  // [R_ZX | c_u] = L⁻¹ Λ [ZᵀX | Zᵀy]
  const width = p + 1;
  const fixedRows = new Float64Array(q * width);
  for (let i = 0; i < q; i++) {
    const li = lambda[i];
    for (let c = 0; c < p; c++) fixedRows[i * width + c] = li * frame.zTx[i * p + c];
    fixedRows[i * width + p] = li * frame.zTy[i];
  }
  blockArrowForwardSolveRows(arrow, fixedRows, width);

  // R_Xᵀ R_X = XᵀX − R_ZXᵀ R_ZX and the right-hand side Xᵀy − R_ZXᵀ c_u.
  const rx = new Float64Array(p * p);
  const cBeta = new Float64Array(p);
  for (let i = 0; i < p; i++) {
    for (let j = 0; j <= i; j++) {
      let sum = frame.xTx[i * p + j];
      for (let k = 0; k < q; k++) sum -= fixedRows[k * width + i] * fixedRows[k * width + j];
      rx[i * p + j] = sum;
      rx[j * p + i] = sum;
    }
    let sum = frame.xTy[i];
    for (let k = 0; k < q; k++) sum -= fixedRows[k * width + i] * fixedRows[k * width + p];
    cBeta[i] = sum;
  }
  if (!choleskyInPlace(rx, p)) return null;
  forwardSolveInPlace(rx, p, cBeta);
  return { theta, lambda, arrow, fixedRows, rx, cBeta, parts: criterionParts(setting, arrow, fixedRows, rx, cBeta) };
}

function criterionParts(setting: CriterionSetting, arrow: BlockArrowWorkspace, fixedRows: Float64Array, rx: Float64Array, cBeta: Float64Array): CriterionParts {
  const { frame, reml, degreesOfFreedom } = setting;
  const p = frame.nFixed;
  const q = frame.layout.size;
  const width = p + 1;
  let pwrss = frame.yTy;
  for (let k = 0; k < q; k++) pwrss -= fixedRows[k * width + p] * fixedRows[k * width + p];
  for (let i = 0; i < p; i++) pwrss -= cBeta[i] * cBeta[i];
  const logDetL = blockArrowLogDeterminant(arrow);
  const logDetRX = choleskyLogDeterminant(rx, p);
  if (!(pwrss > 0)) return { deviance: Infinity, logDetL, logDetRX, pwrss };
  const deviance = logDetL + (reml ? logDetRX : 0) + degreesOfFreedom * (1 + Math.log((2 * Math.PI * pwrss) / degreesOfFreedom));
  return { deviance, logDetL, logDetRX, pwrss };
}

/** The parts of a failed factorisation. */
export const FAILED_PARTS: Readonly<CriterionParts> = Object.freeze({ deviance: Infinity, logDetL: NaN, logDetRX: NaN, pwrss: NaN });

/**
 * β̂ (centred response, before the intercept's shift) and the spherical modes u = L⁻ᵀ (c_u − R_ZX β̂)
 * into `modes` (length q).
 */
export function fixedEffectsAndModes(setting: CriterionSetting, factor: CriterionFactor, modes: Float64Array): Float64Array {
  const p = setting.frame.nFixed;
  const q = setting.frame.layout.size;
  const width = p + 1;
  const beta = Float64Array.from(factor.cBeta);
  backSolveTransposeInPlace(factor.rx, p, beta);
  for (let k = 0; k < q; k++) {
    let sum = factor.fixedRows[k * width + p];
    for (let c = 0; c < p; c++) sum -= factor.fixedRows[k * width + c] * beta[c];
    modes[k] = sum;
  }
  blockArrowBackSolve(factor.arrow, modes);
  return beta;
}
