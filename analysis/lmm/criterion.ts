/**
 * Stage 2 of a fit: the profiled REML (or ML) criterion as a function of the relative
 * standard deviations θ_k = σ_k/σ, computed as lme4 does (Bates et al. 2015, J. Stat. Softw.
 * 67(1), section 3): with Λ = diag(θ) over the random effects,
 *
 *   L Lᵀ = Λ ZᵀZ Λ + I,  R_ZX = L⁻¹ Λ ZᵀX,  R_Xᵀ R_X = XᵀX − R_ZXᵀ R_ZX,
 *   c_u = L⁻¹ Λ Zᵀy,  c_β = R_X⁻ᵀ (Xᵀy − R_ZXᵀ c_u),  pwrss = yᵀy − ‖c_u‖² − ‖c_β‖²,
 *   REML: log|L|² + log|R_X|² + (n − p)(1 + log(2π pwrss/(n − p)))   (lme4's REMLcrit)
 *   ML:   log|L|² + n(1 + log(2π pwrss/n))                          (lme4's deviance)
 *
 * θ_k = 0 is allowed (the term drops out), which is how boundary fits are represented.
 * All work is q×q in block-arrow form (see linalg/block-arrow.ts); nothing is N×N.
 */
import {
  blockArrowBackSolve,
  blockArrowBackSolveRows,
  blockArrowForwardSolve,
  blockArrowForwardSolveRows,
  blockArrowInverseDiagonal,
  blockArrowInverseDiagonalAll,
  blockArrowLogDeterminant,
  factorBlockArrowInPlace,
  makeBlockArrowWorkspace,
} from '../linalg/block-arrow.js';
import { backSolveTransposeInPlace, choleskyInPlace, choleskyLogDeterminant, forwardSolveInPlace, inverseFromCholesky } from '../linalg/dense.js';
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

export interface MixedModelSolution extends CriterionParts {
  theta: Float64Array;
  /** Residual SD at this θ (REML: √(pwrss/(n−p)); ML: √(pwrss/n)), as lme4's sigma(). */
  sigma: number;
  /** Fixed effects on the data scale (intercept first, then treatment contrasts). */
  beta: Float64Array;
  /** (R_Xᵀ R_X)⁻¹, so cov(β̂) = σ² × this (row-major p×p). */
  unscaledCovBeta: Float64Array;
  /** Conditional modes b = Λu of each term's random effects, by level, data scale. */
  randomEffects: Float64Array[];
  /** Conditional variances Var(b | y) of each level of term k, as lme4's ranef(condVar = TRUE). */
  conditionalVariances(termIndex: number): Float64Array;
}

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
   * whose one-sided slope the caller takes by differences). With T = the random-effects block
   * of the inverse of the (spherical) mixed-model matrix and u the spherical modes,
   * ∂f/∂γ_k = (q_k − tr T_kk − ‖u_k‖²/σ̂²)/γ_k (from Λ Zᵀ P Z Λ = I − T and Zᵀ P y = u/θ;
   * Henderson's mixed-model equations, e.g. Searle, Casella & McCulloch 1992, ch. 6 [chapter from memory]).
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
   * (row-major k×k; REML objectives only), null where the factorisation fails. With H = I + Σ γ_k Z_k Z_kᵀ,
   * P the REML projection, r = Py the residuals, w_k = Z_k Z_kᵀ r, s_k = ‖Z_kᵀ r‖² and ν = n − p:
   * ν wₖᵀ P w_l / pwrss − ν s_k s_l / pwrss² (the profiled expected information with the traces
   * replaced by their data versions; Gilmour, Thompson & Cullis 1995, Biometrics 51:1440 [from
   * memory]). Only a start Hessian for the optimiser: it does not decide where the fit stops.
   */
  averageInformation(theta: ArrayLike<number>): Float64Array | null;
  /** (R_Xᵀ R_X)⁻¹ at θ: cov(β̂) = σ² × this. */
  unscaledCovBeta(theta: ArrayLike<number>): Float64Array;
  /** parts(θ) and unscaledCovBeta(θ) from one factorisation. */
  partsAndCovBeta(theta: ArrayLike<number>): { parts: CriterionParts; unscaledCovBeta: Float64Array };
}

export function makeRemlObjective(frame: ModelFrame, options: { reml?: boolean } = {}): RemlObjective {
  const reml = options.reml ?? true;
  const { layout, nFixed: p, nObservations: n } = frame;
  const q = layout.size;
  const nB = layout.borderSize;
  const nTheta = frame.terms.length;
  const workspace = makeBlockArrowWorkspace(layout);
  const lambda = new Float64Array(q);
  const rhs = new Float64Array(q * (p + 1));
  const rx = new Float64Array(p * p);
  const cBeta = new Float64Array(p);
  const degreesOfFreedom = reml ? n - p : n;
  if (degreesOfFreedom <= 0) throw new Error('too few observations for the fixed effects');

  // The last θ factorised: assembling a result right after the optimiser's last evaluation at the
  // same θ reuses the factor instead of recomputing it.
  const lastTheta = new Float64Array(nTheta).fill(Number.NaN);
  let lastFactorOk = false;

  function factor(theta: ArrayLike<number>): boolean {
    if (theta.length !== nTheta) throw new Error(`expected ${nTheta} relative SDs, got ${theta.length}`);
    let same = true;
    for (let k = 0; k < nTheta; k++) if (lastTheta[k] !== theta[k]) same = false;
    if (same) return lastFactorOk;
    for (let k = 0; k < nTheta; k++) lastTheta[k] = theta[k];
    lastFactorOk = factorUncached(theta);
    return lastFactorOk;
  }

  function factorUncached(theta: ArrayLike<number>): boolean {
    for (let i = 0; i < q; i++) lambda[i] = theta[frame.termOfPosition[i]];
    for (let b = 0; b < layout.blockSizes.length; b++) {
      const nb = layout.blockSizes[b];
      const offset = layout.blockOffsets[b];
      const source = frame.zTzBlocks[b];
      const target = workspace.blocks[b];
      for (let i = 0; i < nb; i++) {
        const li = lambda[offset + i];
        for (let j = 0; j < nb; j++) target[i * nb + j] = li * lambda[offset + j] * source[i * nb + j];
        target[i * nb + i] += 1;
      }
      const sourceCoupling = frame.zTzCouplings[b];
      const targetCoupling = workspace.couplings[b];
      for (let i = 0; i < nb; i++) {
        const li = lambda[offset + i];
        for (let j = 0; j < nB; j++) targetCoupling[i * nB + j] = li * lambda[layout.borderOffset + j] * sourceCoupling[i * nB + j];
      }
    }
    for (let i = 0; i < nB; i++) {
      const li = lambda[layout.borderOffset + i];
      for (let j = 0; j < nB; j++) workspace.border[i * nB + j] = li * lambda[layout.borderOffset + j] * frame.zTzBorder[i * nB + j];
      workspace.border[i * nB + i] += 1;
    }
    if (!factorBlockArrowInPlace(workspace)) return false;

    // [R_ZX | c_u] = L⁻¹ Λ [ZᵀX | Zᵀy]
    const width = p + 1;
    for (let i = 0; i < q; i++) {
      const li = lambda[i];
      for (let c = 0; c < p; c++) rhs[i * width + c] = li * frame.zTx[i * p + c];
      rhs[i * width + p] = li * frame.zTy[i];
    }
    blockArrowForwardSolveRows(workspace, rhs, width);

    // R_Xᵀ R_X = XᵀX − R_ZXᵀ R_ZX and the right-hand side Xᵀy − R_ZXᵀ c_u.
    for (let i = 0; i < p; i++) {
      for (let j = 0; j <= i; j++) {
        let sum = frame.xTx[i * p + j];
        for (let k = 0; k < q; k++) sum -= rhs[k * width + i] * rhs[k * width + j];
        rx[i * p + j] = sum;
        rx[j * p + i] = sum;
      }
      let sum = frame.xTy[i];
      for (let k = 0; k < q; k++) sum -= rhs[k * width + i] * rhs[k * width + p];
      cBeta[i] = sum;
    }
    if (!choleskyInPlace(rx, p)) return false;
    forwardSolveInPlace(rx, p, cBeta);
    return true;
  }

  function parts(theta: ArrayLike<number>): CriterionParts {
    if (!factor(theta)) return { deviance: Infinity, logDetL: NaN, logDetRX: NaN, pwrss: NaN };
    const width = p + 1;
    let pwrss = frame.yTy;
    for (let k = 0; k < q; k++) pwrss -= rhs[k * width + p] * rhs[k * width + p];
    for (let i = 0; i < p; i++) pwrss -= cBeta[i] * cBeta[i];
    const logDetL = blockArrowLogDeterminant(workspace);
    const logDetRX = choleskyLogDeterminant(rx, p);
    if (!(pwrss > 0)) return { deviance: Infinity, logDetL, logDetRX, pwrss };
    const deviance =
      logDetL + (reml ? logDetRX : 0) + degreesOfFreedom * (1 + Math.log((2 * Math.PI * pwrss) / degreesOfFreedom));
    return { deviance, logDetL, logDetRX, pwrss };
  }

  function solve(thetaInput: ArrayLike<number>): MixedModelSolution {
    const theta = Float64Array.from(thetaInput);
    const criterion = parts(theta);
    if (!Number.isFinite(criterion.deviance)) throw new Error('the mixed-model equations are singular at these parameters');
    const width = p + 1;
    const beta = Float64Array.from(cBeta);
    backSolveTransposeInPlace(rx, p, beta);
    // Spherical random effects u = L⁻ᵀ (c_u − R_ZX β), then b = Λu.
    const u = new Float64Array(q);
    for (let k = 0; k < q; k++) {
      let sum = rhs[k * width + p];
      for (let c = 0; c < p; c++) sum -= rhs[k * width + c] * beta[c];
      u[k] = sum;
    }
    blockArrowBackSolve(workspace, u);
    beta[0] += frame.responseCentre;
    const randomEffects = frame.terms.map((term, k) =>
      Float64Array.from(term.levels, (_, level) => {
        const position = frame.positionOf[k][level];
        return lambda[position] * u[position];
      }),
    );
    const unscaledCovBeta = inverseFromCholesky(rx, p);
    const sigma = Math.sqrt(criterion.pwrss / degreesOfFreedom);
    // Snapshot of the factor: later evaluations overwrite the shared workspace.
    const snapshot = {
      layout,
      blocks: workspace.blocks.map((block) => block.slice()),
      couplings: workspace.couplings.map((coupling) => coupling.slice()),
      border: workspace.border.slice(),
    };
    const lambdaSnapshot = lambda.slice();
    return {
      ...criterion,
      theta,
      sigma,
      beta,
      unscaledCovBeta,
      randomEffects,
      conditionalVariances(termIndex: number): Float64Array {
        const positions = frame.positionOf[termIndex];
        return Float64Array.from(positions, (position) => {
          const scale = lambdaSnapshot[position];
          if (scale === 0) return 0;
          return sigma * sigma * scale * scale * blockArrowInverseDiagonal(snapshot, position);
        });
      },
    };
  }

  const inverseDiagonal = new Float64Array(q);
  const modes = new Float64Array(q);
  const fixedRows = new Float64Array(q * p);
  const rowBuffer = new Float64Array(p);
  const termSizes = frame.terms.map((term) => term.levels.length);

  function valueAndGradient(theta: ArrayLike<number>): { value: number; gradient: Float64Array } {
    const gradient = new Float64Array(nTheta).fill(Number.NaN);
    const pieces = gradientPieces(theta);
    if (!pieces) return { value: Infinity, gradient };
    const sigma2 = pieces.parts.pwrss / degreesOfFreedom;
    for (let k = 0; k < nTheta; k++) {
      const gamma = theta[k] * theta[k];
      if (gamma > 0) gradient[k] = (termSizes[k] - pieces.traceT[k] - pieces.modeSquares[k] / sigma2) / gamma;
    }
    return { value: pieces.parts.deviance, gradient };
  }

  function gradientPieces(theta: ArrayLike<number>): { parts: CriterionParts; traceT: Float64Array; modeSquares: Float64Array } | null {
    const criterion = parts(theta);
    if (!Number.isFinite(criterion.deviance)) return null;
    const width = p + 1;
    const beta = Float64Array.from(cBeta);
    backSolveTransposeInPlace(rx, p, beta);
    for (let k = 0; k < q; k++) {
      let sum = rhs[k * width + p];
      for (let c = 0; c < p; c++) sum -= rhs[k * width + c] * beta[c];
      modes[k] = sum;
    }
    blockArrowBackSolve(workspace, modes);
    blockArrowInverseDiagonalAll(workspace, inverseDiagonal);
    if (reml) {
      // Fixed-effect part of T: rows g_i of L⁻ᵀ R_ZX, contribution ‖L_X⁻¹ g_i‖².
      for (let i = 0; i < q; i++) for (let c = 0; c < p; c++) fixedRows[i * p + c] = rhs[i * width + c];
      blockArrowBackSolveRows(workspace, fixedRows, p);
      for (let i = 0; i < q; i++) {
        for (let c = 0; c < p; c++) rowBuffer[c] = fixedRows[i * p + c];
        forwardSolveInPlace(rx, p, rowBuffer);
        let sum = 0;
        for (let c = 0; c < p; c++) sum += rowBuffer[c] * rowBuffer[c];
        inverseDiagonal[i] += sum;
      }
    }
    const traceT = new Float64Array(nTheta);
    const modeSquares = new Float64Array(nTheta);
    for (let i = 0; i < q; i++) {
      const k = frame.termOfPosition[i];
      traceT[k] += inverseDiagonal[i];
      modeSquares[k] += modes[i] * modes[i];
    }
    return { parts: criterion, traceT, modeSquares };
  }

  // Observation-level data for the average information: each observation's position in every
  // term, the centred response, and work vectors.
  let obsPositions: Int32Array | null = null;
  const residuals = new Float64Array(n);
  const projected = new Float64Array(n);
  const zSums = new Float64Array(q);
  const solveRhs = new Float64Array(q);
  const betaW = new Float64Array(p);

  /** x ← the mixed-model solution's residual of the response `w` (x = P w), from the current factor. */
  function projectInPlace(w: Float64Array, out: Float64Array): void {
    const positions = obsPositions!;
    const width = p + 1;
    zSums.fill(0);
    betaW.fill(0);
    for (let i = 0; i < n; i++) {
      const value = w[i];
      for (let k = 0; k < nTheta; k++) zSums[positions[i * nTheta + k]] += value;
      betaW[0] += value;
      const fixedColumn = frame.fixedIndex[i];
      if (fixedColumn > 0) betaW[fixedColumn] += value;
    }
    for (let i = 0; i < q; i++) solveRhs[i] = lambda[i] * zSums[i];
    blockArrowForwardSolve(workspace, solveRhs);
    for (let c = 0; c < p; c++) {
      let sum = betaW[c];
      for (let i = 0; i < q; i++) sum -= rhs[i * width + c] * solveRhs[i];
      betaW[c] = sum;
    }
    forwardSolveInPlace(rx, p, betaW);
    backSolveTransposeInPlace(rx, p, betaW);
    for (let i = 0; i < q; i++) {
      let sum = solveRhs[i];
      for (let c = 0; c < p; c++) sum -= rhs[i * width + c] * betaW[c];
      solveRhs[i] = sum;
    }
    blockArrowBackSolve(workspace, solveRhs);
    for (let i = 0; i < q; i++) solveRhs[i] *= lambda[i];
    for (let i = 0; i < n; i++) {
      let fitted = betaW[0];
      const fixedColumn = frame.fixedIndex[i];
      if (fixedColumn > 0) fitted += betaW[fixedColumn];
      for (let k = 0; k < nTheta; k++) fitted += solveRhs[positions[i * nTheta + k]];
      out[i] = w[i] - fitted;
    }
  }

  function averageInformation(theta: ArrayLike<number>): Float64Array | null {
    if (!reml) return null;
    const criterion = parts(theta);
    if (!Number.isFinite(criterion.deviance)) return null;
    if (!obsPositions) {
      obsPositions = new Int32Array(n * nTheta);
      for (let i = 0; i < n; i++) for (let k = 0; k < nTheta; k++) obsPositions[i * nTheta + k] = frame.positionOf[k][frame.terms[k].index[i]];
    }
    const positions = obsPositions;
    for (let i = 0; i < n; i++) residuals[i] = frame.response[i] - frame.responseCentre;
    projectInPlace(residuals, residuals);
    zSums.fill(0);
    for (let i = 0; i < n; i++) for (let k = 0; k < nTheta; k++) zSums[positions[i * nTheta + k]] += residuals[i];
    const termTotals = Float64Array.from(zSums);
    const s = new Float64Array(nTheta);
    for (let i = 0; i < q; i++) s[frame.termOfPosition[i]] += termTotals[i] * termTotals[i];
    const w = Array.from({ length: nTheta }, (_, k) => Float64Array.from(residuals, (_, i) => termTotals[positions[i * nTheta + k]]));
    const information = new Float64Array(nTheta * nTheta);
    const nu = degreesOfFreedom;
    const pwrss = criterion.pwrss;
    for (let l = 0; l < nTheta; l++) {
      projectInPlace(w[l], projected);
      for (let k = 0; k <= l; k++) {
        let sum = 0;
        for (let i = 0; i < n; i++) sum += w[k][i] * projected[i];
        const value = (nu * sum) / pwrss - (nu * s[k] * s[l]) / (pwrss * pwrss);
        information[k * nTheta + l] = value;
        information[l * nTheta + k] = value;
      }
    }
    return information;
  }

  return {
    frame,
    reml,
    nTheta,
    averageInformation,
    valueAndGradient,
    gradientPieces,
    evaluate: (theta) => parts(theta).deviance,
    parts,
    solve,
    unscaledCovBeta(theta: ArrayLike<number>): Float64Array {
      if (!factor(theta)) throw new Error('the mixed-model equations are singular at these parameters');
      return inverseFromCholesky(rx, p);
    },
    partsAndCovBeta(theta: ArrayLike<number>): { parts: CriterionParts; unscaledCovBeta: Float64Array } {
      const criterion = parts(theta);
      if (!Number.isFinite(criterion.deviance)) throw new Error('the mixed-model equations are singular at these parameters');
      return { parts: criterion, unscaledCovBeta: inverseFromCholesky(rx, p) };
    },
  };
}
