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
  makeBlockArrowLayout,
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

/**
 * Pieces of the second derivatives of the criterion in γ_k = θ_k² (Harville 1977, JASA 72:320,
 * eqs. for the REML information [from memory]; checked in the tests against differences of the
 * analytic gradient). With H = I + Σ γ_k Z_k Z_kᵀ, P its REML projection (ML: with the fixed
 * effects profiled out of the quadratic form only), G_k = Z_k Z_kᵀ, and T as in valueAndGradient:
 *
 *   ∂²h/∂γ_k∂γ_l = −tr(P G_k P G_l) + 2 yᵀP G_k P G_l P y / σ²,
 *   γ_k γ_l tr(P G_k P G_l) = ‖δ_kl I − T_kl‖²_F   (from Λ Zᵀ P Z Λ = I − T),
 *   ∂(R_Xᵀ R_X)⁻¹/∂θ_k = (2/θ_k) C F_kᵀ F_k C, C = (R_Xᵀ R_X)⁻¹, F = L⁻ᵀ R_ZX = Λ Zᵀ H⁻¹ X,
 *
 * F_k its rows of term k. Terms with θ_k = 0 get zeros where a division by θ_k would be needed.
 */
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

  /**
   * From the current factor: s_k = ‖Z_kᵀ r‖² and the matrix w_kᵀ P w_l with r = P y and
   * w_k = Z_k Z_kᵀ r (one projection per term).
   */
  function residualCrossProducts(): { termSquares: Float64Array; products: Float64Array } {
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
    const termSquares = new Float64Array(nTheta);
    for (let i = 0; i < q; i++) termSquares[frame.termOfPosition[i]] += termTotals[i] * termTotals[i];
    const w = Array.from({ length: nTheta }, (_, k) => Float64Array.from(residuals, (_, i) => termTotals[positions[i * nTheta + k]]));
    const products = new Float64Array(nTheta * nTheta);
    for (let l = 0; l < nTheta; l++) {
      projectInPlace(w[l], projected);
      for (let k = 0; k <= l; k++) {
        let sum = 0;
        for (let i = 0; i < n; i++) sum += w[k][i] * projected[i];
        products[k * nTheta + l] = sum;
        products[l * nTheta + k] = sum;
      }
    }
    return { termSquares, products };
  }

  function averageInformation(theta: ArrayLike<number>): Float64Array | null {
    if (!reml) return null;
    const criterion = parts(theta);
    if (!Number.isFinite(criterion.deviance)) return null;
    const { termSquares: s, products } = residualCrossProducts();
    const information = new Float64Array(nTheta * nTheta);
    const nu = degreesOfFreedom;
    const pwrss = criterion.pwrss;
    for (let l = 0; l < nTheta; l++) {
      for (let k = 0; k <= l; k++) {
        const value = (nu * products[k * nTheta + l]) / pwrss - (nu * s[k] * s[l]) / (pwrss * pwrss);
        information[k * nTheta + l] = value;
        information[l * nTheta + k] = value;
      }
    }
    return information;
  }

  /** The first `size` rows of the row-major ·×m matrix X ← L⁻¹ X (L lower triangular size×size), as a one-block arrow. */
  function lowerSolveRowsLocal(l: Float64Array, size: number, x: Float64Array, m: number): void {
    const single = { layout: makeBlockArrowLayout([size], 0), blocks: [l], couplings: [new Float64Array(0)], border: new Float64Array(0) };
    blockArrowForwardSolveRows(single, x, m);
  }

  /**
   * ‖δ_kl I − T_kl‖²_F per pair of terms, T the random-effects block of the inverse of the
   * spherical mixed-model matrix, from the current factor. With L⁻¹ = [[L_b⁻¹, 0], [N_b, L_B⁻¹]],
   * N_b = −L_B⁻¹ W_bᵀ L_b⁻¹: T = KᵀK + blockdiag(L_b⁻ᵀ L_b⁻¹), K the border rows of L⁻¹ stacked
   * (REML) on the rows of R_X⁻ᵀ (L⁻ᵀ R_ZX)ᵀ, so no q×q solve is done and T is never stored.
   */
  function traceProductsFromFactor(fixedPart: Float64Array | null): Float64Array {
    const nK = nB + (fixedPart ? p : 0);
    const k = new Float64Array(nK * q);
    const blockInverses: Float64Array[] = [];
    const blockOf = new Int32Array(q).fill(-1);
    for (let b = 0; b < layout.blockSizes.length; b++) {
      const nb = layout.blockSizes[b];
      const offset = layout.blockOffsets[b];
      blockOf.fill(b, offset, offset + nb);
      // L_b⁻¹ (row r, column i at r·nb + i), then L_b⁻ᵀ L_b⁻¹ (lower triangle).
      const inverse = new Float64Array(nb * nb);
      for (let i = 0; i < nb; i++) inverse[i * nb + i] = 1;
      lowerSolveRowsLocal(workspace.blocks[b], nb, inverse, nb);
      const gram = new Float64Array(nb * nb);
      for (let i = 0; i < nb; i++) {
        for (let j = 0; j <= i; j++) {
          let sum = 0;
          for (let r = i; r < nb; r++) sum += inverse[r * nb + i] * inverse[r * nb + j];
          gram[i * nb + j] = sum;
        }
      }
      blockInverses.push(gram);
      const coupling = workspace.couplings[b];
      for (let r = 0; r < nb; r++) {
        for (let border = 0; border < nB; border++) {
          const c = coupling[r * nB + border];
          if (c === 0) continue;
          const row = border * q + offset;
          for (let i = 0; i <= r; i++) k[row + i] -= c * inverse[r * nb + i];
        }
      }
    }
    for (let border = 0; border < nB; border++) k[border * q + layout.borderOffset + border] = 1;
    if (nB > 0) lowerSolveRowsLocal(workspace.border, nB, k, q);
    // Column i of K contiguous (q×nK), so each T_ij is one short dot product.
    const columns = new Float64Array(q * nK);
    for (let r = 0; r < nB; r++) for (let i = 0; i < q; i++) columns[i * nK + r] = k[r * q + i];
    if (fixedPart) for (let i = 0; i < q; i++) for (let c = 0; c < p; c++) columns[i * nK + nB + c] = fixedPart[i * p + c];
    const traceProducts = new Float64Array(nTheta * nTheta);
    let smallest = Infinity;
    for (let i = 0; i < q; i++) if (lambda[i] > 0) smallest = Math.min(smallest, lambda[i]);
    if (smallest < 1e-2) {
      // Entry by entry: δ_ij − T_ij loses only ε/θ² relative where T_kk ≈ I (θ_k small).
      for (let i = 0; i < q; i++) {
        const termI = frame.termOfPosition[i];
        const baseI = i * nK;
        const blockI = blockOf[i];
        for (let j = 0; j <= i; j++) {
          const baseJ = j * nK;
          let t = 0;
          for (let r = 0; r < nK; r++) t += columns[baseI + r] * columns[baseJ + r];
          if (blockI >= 0 && blockOf[j] === blockI) {
            const offset = layout.blockOffsets[blockI];
            t += blockInverses[blockI][(i - offset) * layout.blockSizes[blockI] + j - offset];
          }
          const value = (i === j ? 1 : 0) - t;
          const termJ = frame.termOfPosition[j];
          traceProducts[termI * nTheta + termJ] += value * value;
          if (i !== j) traceProducts[termJ * nTheta + termI] += value * value;
        }
      }
      return traceProducts;
    }
    // Otherwise in nK×nK pieces (relative error about ε/θ⁴, negligible for θ ≥ 10⁻²): with
    // B = I − blockdiag(L_b⁻ᵀ L_b⁻¹), ‖(B − KᵀK)_kl‖² = ‖B_kl‖² − 2⟨B_kl, (KᵀK)_kl⟩ + ⟨S_k, S_l⟩,
    // S_k = K_k K_kᵀ over the columns of term k (‖K_kᵀ K_l‖² = tr(S_k S_l)).
    const grams = Array.from({ length: nTheta }, () => new Float64Array(nK * nK));
    for (let i = 0; i < q; i++) {
      const gram = grams[frame.termOfPosition[i]];
      const base = i * nK;
      for (let r = 0; r < nK; r++) {
        const value = columns[base + r];
        if (value === 0) continue;
        for (let c = 0; c <= r; c++) gram[r * nK + c] += value * columns[base + c];
      }
    }
    for (let a = 0; a < nTheta; a++) {
      for (let b = 0; b <= a; b++) {
        let sum = 0;
        for (let r = 0; r < nK; r++) {
          for (let c = 0; c < r; c++) sum += 2 * grams[a][r * nK + c] * grams[b][r * nK + c];
          sum += grams[a][r * nK + r] * grams[b][r * nK + r];
        }
        traceProducts[a * nTheta + b] = sum;
        traceProducts[b * nTheta + a] = sum;
      }
    }
    for (let b = 0; b < layout.blockSizes.length; b++) {
      const nb = layout.blockSizes[b];
      const offset = layout.blockOffsets[b];
      for (let i = 0; i < nb; i++) {
        const termI = frame.termOfPosition[offset + i];
        const baseI = (offset + i) * nK;
        for (let j = 0; j <= i; j++) {
          const termJ = frame.termOfPosition[offset + j];
          const baseJ = (offset + j) * nK;
          let cross = 0;
          for (let r = 0; r < nK; r++) cross += columns[baseI + r] * columns[baseJ + r];
          const value = (i === j ? 1 : 0) - blockInverses[b][i * nb + j];
          const contribution = value * value - 2 * value * cross;
          traceProducts[termI * nTheta + termJ] += contribution;
          if (i !== j) traceProducts[termJ * nTheta + termI] += contribution;
        }
      }
    }
    // Border positions: B = I there.
    for (let i = layout.borderOffset; i < q; i++) {
      const term = frame.termOfPosition[i];
      let cross = 0;
      for (let r = 0; r < nK; r++) cross += columns[i * nK + r] * columns[i * nK + r];
      traceProducts[term * nTheta + term] += 1 - 2 * cross;
    }
    return traceProducts;
  }

  function secondOrderPieces(theta: ArrayLike<number>): SecondOrderPieces | null {
    const pieces = gradientPieces(theta);
    if (!pieces) return null;
    const width = p + 1;
    // F = L⁻ᵀ R_ZX, and its rows through R_X⁻ᵀ (the fixed part of T, REML only).
    const f = new Float64Array(q * p);
    for (let i = 0; i < q; i++) for (let c = 0; c < p; c++) f[i * p + c] = rhs[i * width + c];
    blockArrowBackSolveRows(workspace, f, p);
    let fixedPart: Float64Array | null = null;
    if (reml) {
      fixedPart = f.slice();
      for (let i = 0; i < q; i++) forwardSolveInPlace(rx, p, fixedPart, i * p);
    }
    const traceProducts = traceProductsFromFactor(fixedPart);
    const { termSquares, products } = residualCrossProducts();
    const unscaledCovBeta = inverseFromCholesky(rx, p);
    const unscaledCovBetaDerivatives = Array.from({ length: nTheta }, () => new Float64Array(p * p));
    const cf = new Float64Array(p);
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

  return {
    frame,
    reml,
    nTheta,
    averageInformation,
    secondOrderPieces,
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
