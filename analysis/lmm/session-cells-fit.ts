/**
 * The one-session model fitted entirely from its cell summaries (session-criterion.ts): Newton
 * steps with the exact Hessian in γ (session-newton.ts, session-criterion-hessian.ts), then the reported quantities at the optimum —
 * variances, REMLcrit, GLS product means and SEs, assessor conditional modes and SDs, and the
 * product F-test with lmerTest's Satterthwaite df — without a model frame or a factorisation of
 * the random-effects system. Used for sessions without a closed form (missing ratings, a new
 * assessor); the general path (criterion.ts) gives the same numbers to the fixtures' tolerances
 * and is still what a caller gets who asks for the full LmmFit.
 */
import type { LmmDiagnostics } from './fit.js';
import { SINGULAR_THETA_TOLERANCE } from './fit.js';
import { completeVarparCovariance, productContrastRows, productFTest, type ProductTest } from './satterthwaite.js';
import type { SessionCriterion } from './session-criterion.js';
import { makeSessionSecondOrder, type SessionSecondOrder } from './session-criterion-hessian.js';
import { minimizeSessionNewton, SESSION_NEWTON_NAME } from './session-newton.js';

/** The optimiser's name in the diagnostics of fits taken from the cell summaries. */
export const CELL_SUMS_OPTIMIZER_NAME = `cell-sums+${SESSION_NEWTON_NAME}`;

export interface SessionCellsFit {
  theta: Float64Array;
  residualVariance: number;
  /** σ²_a, σ²_ap (0 when the model has no interaction term). */
  assessorVariance: number;
  interactionVariance: number;
  criterion: number;
  productMeans: { mean: number; se: number }[];
  assessorEffects: { blup: number; condSD: number }[];
  productTest: ProductTest;
  diagnostics: LmmDiagnostics;
}

/**
 * @param productCounts ratings per product (for lmerTest's contrast rows from XᵀX)
 * @returns null when the criterion is not finite at the optimum or near it (the caller then takes the general path)
 */
export function fitSessionCells(criterion: SessionCriterion, startTheta: number[], productCounts: Float64Array): SessionCellsFit | null {
  const second = makeSessionSecondOrder(criterion);
  const optimum = minimizeSessionNewton(second, startTheta);
  const theta = optimum.theta;
  const solution = criterion.solution(theta);
  if (!solution) return null;
  const p = criterion.nProducts;
  const degrees = criterion.nObservations - p;
  const sigma2 = solution.pwrss / degrees;
  const sigma = Math.sqrt(sigma2);
  const unscaledCov = toTreatmentCoding(solution.unscaledCovMeans, p);
  // Loops rather than Float64Array.from with a mapping function, which is slow in V8.
  const covBeta = toTreatmentCoding(solution.unscaledCovMeans, p, sigma2);
  const beta = new Float64Array(p);
  for (let j = 0; j < p; j++) beta[j] = j === 0 ? solution.productMeans[0] : solution.productMeans[j] - solution.productMeans[0];
  const messages = [...optimum.messages];

  const contrasts = productContrastRows(treatmentCrossProduct(productCounts), p);
  let varpar: ReturnType<typeof completeVarparCovariance> | null = null;
  if (contrasts.length > 0) {
    varpar = exactVarpar(second, optimum.gamma, theta, sigma, degrees, solution.pwrss, unscaledCov);
    if (!varpar) return null;
    if (varpar.hessianEigenvalues.some((value) => value < -1e-8)) messages.push('the Hessian of the criterion has a negative eigenvalue: the fit may not be at a minimum');
  }
  const productTest = productFTest(beta, covBeta, contrasts, varpar);
  messages.push(...productTest.messages);
  const singular = [...theta].some((value) => value < SINGULAR_THETA_TOLERANCE);
  if (singular) messages.push('singular fit: some variance component is estimated as zero');
  return {
    theta,
    residualVariance: sigma2,
    assessorVariance: theta[0] * theta[0] * sigma2,
    interactionVariance: theta.length > 1 ? theta[1] * theta[1] * sigma2 : 0,
    criterion: solution.deviance,
    productMeans: Array.from(solution.productMeans, (mean, j) => ({ mean, se: Math.sqrt(sigma2 * solution.unscaledCovMeans[j * p + j]) })),
    assessorEffects: Array.from(solution.assessorModes, (blup, a) => ({ blup, condSD: Math.sqrt(sigma2 * solution.assessorConditional[a]) })),
    productTest,
    diagnostics: {
      converged: optimum.converged,
      singular,
      iterations: optimum.iterations,
      evaluations: optimum.evaluations,
      optimizer: CELL_SUMS_OPTIMIZER_NAME,
      messages,
      gradientMaxAbs: Math.max(0, ...[...optimum.projectedGradient].map(Math.abs)),
    },
  };
}

/**
 * lmerTest's Hessian of the deviance in (θ, σ) and ∂cov(β̂)/∂θ, exactly, from the second-order
 * pieces at θ̂ (session-criterion-hessian.ts): with h the fixed-σ deviance in γ = θ²,
 * ∂²h/∂θ_k∂θ_l = 4θ_kθ_l ∂²h/∂γ_k∂γ_l + 2δ_kl ∂h/∂γ_k and ∂C⁻¹/∂θ_k = 2θ_k ∂C⁻¹/∂γ_k; the σ
 * parts follow analytically (satterthwaite.ts). Components at 0 are left out (see satterthwaite.ts).
 */
function exactVarpar(
  second: SessionSecondOrder,
  gamma: Float64Array,
  theta: Float64Array,
  sigma: number,
  degrees: number,
  pwrss: number,
  unscaledCov: Float64Array,
): ReturnType<typeof completeVarparCovariance> | null {
  const k = second.nComponents;
  const p = Math.round(Math.sqrt(unscaledCov.length));
  const sigma2 = sigma * sigma;
  // The search's last evaluation is usually at the answer already: its pieces are reused.
  const atAnswer = second.lastGamma[0] === gamma[0] && (k === 1 || second.lastGamma[1] === gamma[1]);
  if (!atAnswer && !Number.isFinite(second.evaluate(gamma[0], k > 1 ? gamma[1] : 0))) return null;
  const gradientGamma = new Float64Array(k);
  const hessianGamma = new Float64Array(k * k);
  const covarianceDerivatives = Array.from({ length: k }, () => new Float64Array(p * p));
  second.fixedSigma(sigma2, gradientGamma, hessianGamma, covarianceDerivatives);
  const free = [...theta].map((_, index) => index).filter((index) => theta[index] > 0);
  const m = free.length;
  const dimension = m + 1;
  const hessian = new Float64Array(dimension * dimension);
  for (let i = 0; i < m; i++) {
    for (let j = 0; j < m; j++) {
      const a = free[i];
      const b = free[j];
      hessian[i * dimension + j] = 4 * theta[a] * theta[b] * hessianGamma[a * k + b] + (a === b ? 2 * gradientGamma[a] : 0);
    }
  }
  const jacobians = free.map((index) => toTreatmentCoding(covarianceDerivatives[index], p, 2 * theta[index] * sigma2));
  const pwrssGradient = free.map((index) => -2 * theta[index] * second.residualQuadratics[index]);
  const finite = hessian.every(Number.isFinite) && jacobians.every((jacobian) => jacobian.every(Number.isFinite));
  return finite ? completeVarparCovariance(hessian, jacobians, pwrssGradient, pwrss, sigma, degrees, unscaledCov) : null;
}

/**
 * scale × T M Tᵀ for the map from product means μ to lme4's treatment coding β (β_0 = μ_0,
 * β_j = μ_j − μ_0): row-major p×p.
 */
function toTreatmentCoding(matrix: Float64Array, p: number, scale = 1): Float64Array {
  const out = new Float64Array(p * p);
  // Indexed directly: a helper returning a double boxes it on every call unless inlined, and the
  // analyze command compiles without inlining (server/cli/analyze-command.ts).
  for (let i = 0; i < p; i++) {
    for (let j = 0; j < p; j++) {
      let value = matrix[i * p + j];
      if (i > 0) value -= matrix[j];
      if (j > 0) value -= matrix[i * p];
      if (i > 0 && j > 0) value += matrix[0];
      out[i * p + j] = scale * value;
    }
  }
  return out;
}

/** XᵀX of the treatment-coded design [1, d_2, …, d_P]. */
function treatmentCrossProduct(productCounts: Float64Array): Float64Array {
  const p = productCounts.length;
  const xTx = new Float64Array(p * p);
  let total = 0;
  for (let j = 0; j < p; j++) total += productCounts[j];
  xTx[0] = total;
  for (let j = 1; j < p; j++) {
    xTx[j] = productCounts[j];
    xTx[j * p] = productCounts[j];
    xTx[j * p + j] = productCounts[j];
  }
  return xTx;
}
