/**
 * The REML criterion of the one-session model, value ~ product + (1|assessor) [+ (1|assessor:product)],
 * on any pattern of missing ratings, from the cell summaries alone (count, mean and within-cell
 * sum of squares of each assessor × product cell). It is the same function of θ as the general
 * criterion (criterion.ts, lme4's REMLcrit), written for this design so that one evaluation costs
 * O(A·P²) instead of a factorisation of the random-effects system: the optimiser calls it tens
 * of times per fit, the general objective then assembles the answer once at the optimum.
 *
 * With γ_a = θ_a², γ_ap = θ_ap² and H = V/σ² = I + γ_a Z_aZ_aᵀ + γ_ap Z_apZ_apᵀ, H is block
 * diagonal by assessor, and each block is a diagonal-plus-rank-one update of a block diagonal over
 * cells (exchangeable within a cell), so by the Sherman–Morrison formula, with n_ij ratings in
 * cell (i, j), w_ij = n_ij/(1 + γ_ap n_ij), M_i = Σ_j w_ij and d_i = 1 + γ_a M_i:
 *
 *   log|H| = Σ_ij log(1 + γ_ap n_ij) + Σ_i log d_i,
 *   C = XᵀH⁻¹X = Σ_i [diag(w_i) − γ_a w_i w_iᵀ/d_i]        (cell-means coding of the products),
 *   XᵀH⁻¹y = Σ_i [w_i ∘ m_i − γ_a w_i t_i/d_i],  t_i = Σ_j w_ij m_ij   (m_ij the cell mean),
 *   pwrss = Σ_ij WSS_ij + Σ_i [Σ_j w_ij e_ij² − γ_a (Σ_j w_ij e_ij)²/d_i],  e_ij = m_ij − β̂_j,
 *   REMLcrit = log|H| + log|C| + (N − P)(1 + log(2π pwrss/(N − P)))
 *
 * (Searle, Casella & McCulloch 1992, Variance Components, ch. 6, for REML as log|V| + log|XᵀV⁻¹X|
 * + the profiled residual term; the treatment-contrast X of lme4 differs from the cell-means
 * coding by a unit-determinant map, so log|C| is the same). The gradient in γ is the usual
 * ∂/∂γ_k = tr(P G_k) − (N − P) yᵀPG_kPy / pwrss with G_k = Z_kZ_kᵀ (Harville 1977, JASA 72:320),
 * whose pieces are again cell sums (see valueAndGradient).
 */
import { momentStart } from './session-moment-start.js';

export interface SessionCriterion {
  /** REMLcrit at θ (relative SDs, term order assessor then assessor:product). */
  evaluate(theta: ArrayLike<number>): number;
  /** REMLcrit and its gradient with respect to γ = θ², as the optimiser expects. */
  valueAndGradient(theta: ArrayLike<number>): { value: number; gradient: Float64Array };
  /** Everything the fit reports at θ; null where the criterion is not finite. */
  solution(theta: ArrayLike<number>): SessionSolution | null;
  /**
   * Start values for the search from unweighted cell-means moments (an ANOVA of the cell means
   * with the harmonic mean of the cell counts as the replicate number): close to the answer for
   * nearly balanced sessions, kept away from the boundary as the balanced start is.
   */
  momentStart(): number[];
  /** REMLcrit at γ = (γ_a, γ_ap) = θ², leaving `state` at γ (Infinity where not finite). */
  valueAtGamma(gammaA: number, gammaAP: number): number;
  /** The work arrays of the last evaluation (read by session-criterion-hessian.ts). */
  readonly state: SessionCriterionState;
  nObservations: number;
  nProducts: number;
}

/** The last evaluation's pieces; valid until the next evaluation. */
export interface SessionCriterionState {
  nAssessors: number;
  nProducts: number;
  withInteraction: boolean;
  /** N − P. */
  degrees: number;
  /** w_ij = n_ij/(1 + γ_ap n_ij) per cell (0 for empty cells). */
  weight: Float64Array;
  /** d_i = 1 + γ_a Σ_j w_ij per assessor. */
  denominator: Float64Array;
  /** t_i = Σ_j w_ij e_ij per assessor. */
  assessorSum: Float64Array;
  /** e_ij = m_ij − β̂_j per cell (0 for empty cells). */
  residualMean: Float64Array;
  pwrss(): number;
  /** C⁻¹ (row-major, cell-means coding) into `target`. */
  fillInverseC(target: Float64Array): void;
}

export interface SessionSolution {
  deviance: number;
  pwrss: number;
  /** GLS product means (cell-means coding), data scale. */
  productMeans: Float64Array;
  /** C⁻¹ = (XᵀH⁻¹X)⁻¹ in cell-means coding: cov of the product means is σ² × this (row-major). */
  unscaledCovMeans: Float64Array;
  /** Conditional modes of the assessor effects, data scale: γ_a t_i/d_i. */
  assessorModes: Float64Array;
  /** Var(b_i | y)/σ² = γ_a/d_i, as lme4's condVar (β at its estimate). */
  assessorConditional: Float64Array;
}

/**
 * @param assessorCodes level index 0..nAssessors−1 of each rating
 * @param productCodes level index 0..nProducts−1 of each rating (every product rated at least once)
 * @param withInteraction θ has two components (assessor, assessor:product), else one (assessor)
 */
export function makeSessionCriterion(
  values: ArrayLike<number>,
  assessorCodes: Int32Array,
  productCodes: Int32Array,
  nAssessors: number,
  nProducts: number,
  withInteraction: boolean,
): SessionCriterion {
  const nObservations = values.length;
  const nCells = nAssessors * nProducts;
  const count = new Float64Array(nCells);
  const mean = new Float64Array(nCells);
  // Centred on the grand mean: the intercept is in the column space of X, so nothing changes but rounding.
  let grand = 0;
  for (let i = 0; i < nObservations; i++) grand += values[i];
  grand /= nObservations;
  for (let i = 0; i < nObservations; i++) {
    const cell = assessorCodes[i] * nProducts + productCodes[i];
    count[cell] += 1;
    mean[cell] += values[i] - grand;
  }
  for (let c = 0; c < nCells; c++) if (count[c] > 0) mean[c] /= count[c];
  let withinSS = 0;
  for (let i = 0; i < nObservations; i++) {
    const deviation = values[i] - grand - mean[assessorCodes[i] * nProducts + productCodes[i]];
    withinSS += deviation * deviation;
  }
  const degrees = nObservations - nProducts;
  const logTwoPi = Math.log(2 * Math.PI);

  // Work arrays, reused by every evaluation.
  const weight = new Float64Array(nCells);
  const logOnePlus = new Float64Array(nCells);
  const denominator = new Float64Array(nAssessors);
  const c = new Float64Array(nProducts * nProducts);
  const beta = new Float64Array(nProducts);
  const residualMean = new Float64Array(nCells);
  const assessorSum = new Float64Array(nAssessors);
  const vector = new Float64Array(nProducts);
  const solved = new Float64Array(nProducts);
  const inverse = new Float64Array(nProducts * nProducts);

  /**
   * Fills the work arrays at γ and returns the criterion (Infinity where C is not positive
   * definite or pwrss is not positive).
   */
  function compute(gammaA: number, gammaAP: number): number {
    let logDetH = 0;
    for (let cell = 0; cell < nCells; cell++) {
      const n = count[cell];
      const onePlus = 1 + gammaAP * n;
      weight[cell] = n / onePlus;
      logOnePlus[cell] = Math.log(onePlus);
      logDetH += logOnePlus[cell];
    }
    c.fill(0);
    beta.fill(0);
    for (let a = 0; a < nAssessors; a++) {
      const row = a * nProducts;
      let total = 0;
      let weightedMean = 0;
      for (let j = 0; j < nProducts; j++) {
        total += weight[row + j];
        weightedMean += weight[row + j] * mean[row + j];
      }
      const d = 1 + gammaA * total;
      denominator[a] = d;
      logDetH += Math.log(d);
      const shrink = gammaA / d;
      for (let j = 0; j < nProducts; j++) {
        const wj = weight[row + j];
        if (wj === 0) continue;
        c[j * nProducts + j] += wj;
        beta[j] += wj * mean[row + j] - shrink * wj * weightedMean;
        for (let k = 0; k <= j; k++) c[j * nProducts + k] -= shrink * wj * weight[row + k];
      }
    }
    // Cholesky of C (lower triangle), then β̂ = C⁻¹ XᵀH⁻¹y.
    let logDetC = 0;
    for (let j = 0; j < nProducts; j++) {
      const rowJ = j * nProducts;
      let diagonal = c[rowJ + j];
      for (let k = 0; k < j; k++) diagonal -= c[rowJ + k] * c[rowJ + k];
      if (!(diagonal > 0)) return Number.POSITIVE_INFINITY;
      const ljj = Math.sqrt(diagonal);
      c[rowJ + j] = ljj;
      logDetC += 2 * Math.log(ljj);
      for (let i = j + 1; i < nProducts; i++) {
        const rowI = i * nProducts;
        let sum = c[rowI + j];
        for (let k = 0; k < j; k++) sum -= c[rowI + k] * c[rowJ + k];
        c[rowI + j] = sum / ljj;
      }
    }
    choleskySolve(c, nProducts, beta);
    let pwrss = withinSS;
    for (let a = 0; a < nAssessors; a++) {
      const row = a * nProducts;
      let sum = 0;
      for (let j = 0; j < nProducts; j++) {
        const at = row + j;
        const wj = weight[at];
        // An empty cell (weight 0) has no residual. No statement that runs for empty cells only:
        // the first empty cell would throw the compiled code away (nothing recorded for it yet).
        const e = wj === 0 ? 0 : mean[at] - beta[j];
        residualMean[at] = e;
        sum += wj * e;
        pwrss += wj * e * e;
      }
      assessorSum[a] = sum;
      pwrss -= (gammaA * sum * sum) / denominator[a];
    }
    if (!(pwrss > 0)) return Number.POSITIVE_INFINITY;
    currentPwrss = pwrss;
    return logDetH + logDetC + degrees * (1 + logTwoPi + Math.log(pwrss / degrees));
  }
  let currentPwrss = 0;

  /** Solves C x = b in place with C's Cholesky factor (lower triangle of `factor`). */
  function choleskySolve(factor: Float64Array, n: number, b: Float64Array): void {
    for (let i = 0; i < n; i++) {
      let sum = b[i];
      for (let k = 0; k < i; k++) sum -= factor[i * n + k] * b[k];
      b[i] = sum / factor[i * n + i];
    }
    for (let i = n - 1; i >= 0; i--) {
      let sum = b[i];
      for (let k = i + 1; k < n; k++) sum -= factor[k * n + i] * b[k];
      b[i] = sum / factor[i * n + i];
    }
  }

  const gammas = (theta: ArrayLike<number>): [number, number] => [theta[0] * theta[0], withInteraction ? theta[1] * theta[1] : 0];

  /**
   * After compute(): tr(PG_k) and yᵀPG_kPy (y in H units) for k = assessor, assessor:product.
   * With r = y − Xβ̂ and Py = H⁻¹r: the sum of Py over assessor i's ratings is t_i/d_i
   * (t_i = Σ_j w_ij e_ij) and over cell (i, j) it is u_ij = w_ij (e_ij − γ_a t_i/d_i), so
   * yᵀPG_aPy = Σ_i (t_i/d_i)² and yᵀPG_apPy = Σ_ij u_ij². For the traces, tr(PG) =
   * tr(H⁻¹G) − tr(C⁻¹ XᵀH⁻¹GH⁻¹X): the sum of H⁻¹ over assessor i's block is M_i/d_i, over a
   * cell w_ij − γ_a w_ij²/d_i; XᵀH⁻¹1_i = w_i/d_i and XᵀH⁻¹1_ij = w_ij (e_j − γ_a w_i/d_i).
   */
  function gradientPieces(gammaA: number): { traceA: number; traceAP: number; quadraticA: number; quadraticAP: number } {
    // With C⁻¹ explicit, z_i = C⁻¹w_i gives every quadratic form below in O(P) per cell:
    // (w_i/d)ᵀC⁻¹(w_i/d) = w_iᵀz_i/d² and, with s = γ_a/d,
    // (e_l − s w_i)ᵀC⁻¹(e_l − s w_i) = C⁻¹_ll − 2s z_il + s² w_iᵀz_i.
    fillInverseC(inverse);
    let traceA = 0;
    let traceAP = 0;
    let quadraticA = 0;
    let quadraticAP = 0;
    for (let a = 0; a < nAssessors; a++) {
      const row = a * nProducts;
      const d = denominator[a];
      const shrink = gammaA / d;
      let total = 0;
      let wz = 0;
      for (let j = 0; j < nProducts; j++) {
        const wj = weight[row + j];
        total += wj;
        let z = 0;
        for (let k = 0; k < nProducts; k++) z += inverse[j * nProducts + k] * weight[row + k];
        vector[j] = z;
        wz += wj * z;
      }
      traceA += total / d - wz / (d * d);
      const t = assessorSum[a];
      quadraticA += (t / d) * (t / d);
      if (!withInteraction) continue;
      for (let l = 0; l < nProducts; l++) {
        const wl = weight[row + l];
        if (wl === 0) continue;
        traceAP += wl - shrink * wl * wl;
        const u = wl * (residualMean[row + l] - shrink * t);
        quadraticAP += u * u;
        traceAP -= wl * wl * (inverse[l * nProducts + l] - 2 * shrink * vector[l] + shrink * shrink * wz);
      }
    }
    return { traceA, traceAP, quadraticA, quadraticAP };
  }

  /** C⁻¹ from its Cholesky factor into `target` (row-major), after compute(). */
  function fillInverseC(target: Float64Array): void {
    for (let column = 0; column < nProducts; column++) {
      solved.fill(0);
      solved[column] = 1;
      choleskySolve(c, nProducts, solved);
      for (let row = 0; row < nProducts; row++) target[row * nProducts + column] = solved[row];
    }
  }

  /** A fresh copy of C⁻¹ (cell-means coding), after compute(). */
  function inverseC(): Float64Array {
    const copy = new Float64Array(nProducts * nProducts);
    fillInverseC(copy);
    return copy;
  }

  return {
    evaluate(theta) {
      const [gammaA, gammaAP] = gammas(theta);
      return compute(gammaA, gammaAP);
    },
    valueAndGradient(theta) {
      const [gammaA, gammaAP] = gammas(theta);
      const value = compute(gammaA, gammaAP);
      const gradient = new Float64Array(withInteraction ? 2 : 1);
      if (!Number.isFinite(value)) return { value, gradient: gradient.fill(Number.NaN) };
      const pieces = gradientPieces(gammaA);
      const scale = degrees / currentPwrss;
      gradient[0] = pieces.traceA - scale * pieces.quadraticA;
      if (withInteraction) gradient[1] = pieces.traceAP - scale * pieces.quadraticAP;
      return { value, gradient };
    },
    solution(theta) {
      const [gammaA, gammaAP] = gammas(theta);
      const deviance = compute(gammaA, gammaAP);
      if (!Number.isFinite(deviance)) return null;
      const productMeans = new Float64Array(nProducts);
      for (let j = 0; j < nProducts; j++) productMeans[j] = beta[j] + grand;
      const assessorModes = new Float64Array(nAssessors);
      const assessorConditional = new Float64Array(nAssessors);
      for (let a = 0; a < nAssessors; a++) {
        assessorModes[a] = (gammaA * assessorSum[a]) / denominator[a];
        assessorConditional[a] = gammaA / denominator[a];
      }
      return {
        deviance,
        pwrss: currentPwrss,
        productMeans,
        unscaledCovMeans: inverseC(),
        assessorModes,
        assessorConditional,
      };
    },
    momentStart: () => momentStart({ count, mean, withinSS, nObservations, nAssessors, nProducts, withInteraction }),
    state: {
      nAssessors,
      nProducts,
      withInteraction,
      degrees,
      weight,
      denominator,
      assessorSum,
      residualMean,
      pwrss: () => currentPwrss,
      fillInverseC,
    },
    valueAtGamma: compute,
    nObservations,
    nProducts,
  };
}
