/**
 * Product F-test with Satterthwaite denominator degrees of freedom, computed as lmerTest 3.1
 * does it (Kuznetsova, Brockhoff & Christensen 2017, J. Stat. Softw. 82(13), section 3; source
 * functions as_lmerModLT, contestMD, contest1D, get_Fstat_ddf):
 *
 * - variance parameters varpar = (θ_1..θ_K, σ) with θ_k = σ_k/σ;
 * - A = 2 H⁺, H the Hessian of the deviance −2ℓ_R(θ, σ) (lmerTest's devfun_vp), H⁺ its
 *   Moore–Penrose inverse over eigenvalues > 1e-8;
 * - J_i = ∂cov(β̂)/∂varpar_i;
 * - L: the rows of the product term in the transposed unit-lower factor of a Doolittle
 *   LU decomposition of XᵀX (lmerTest's type-I/III contrasts for a one-term model);
 * - eigen-decompose L cov(β̂) Lᵀ = P D Pᵀ, keep eigenvalues > √ε·d_1, rows ℓ_m of PᵀL;
 *   ν_m = 2 d_m² / (g_mᵀ A g_m), g_m,i = ℓ_m J_i ℓ_mᵀ;
 * - one row: ddf = ν_1; equal ν (within 1e-8): their mean; any ν_m ≤ 2: 2;
 *   else E = Σ ν_m/(ν_m − 2), ddf = 2E/(E − q).
 *
 * Differences from lmerTest: all derivatives are analytic (lmerTest: numDeriv's Richardson
 * extrapolation on the deviance and on cov(β̂)) — the θ Hessian and ∂cov(β̂)/∂θ from
 * criterion.secondOrderPieces, central differences of the analytic gradient only as the
 * fallback — and components at 0 are
 * left out (at θ_k = 0 the deviance is even in θ_k, so lmerTest's Hessian has no cross terms
 * with θ_k and ∂cov(β̂)/∂θ_k = 0: leaving it out gives the same numbers).
 */
import { fUpperTail } from '../distributions/index.js';
import { symmetricEigen } from '../linalg/dense.js';
import type { RemlObjective } from './criterion.js';

export interface ProductTest {
  F: number | null;
  numDf: number;
  denDf: number | null;
  pValue: number | null;
  /** Per-eigenvector Satterthwaite df ν_m (diagnostic). */
  nuPerContrast: number[];
  messages: string[];
}

export interface VarparCovariance {
  /** Indices of the θ components kept (those > 0). */
  freeComponents: number[];
  /** Asymptotic covariance 2H⁺ of (θ_free..., σ), row-major. */
  covariance: Float64Array;
  /** Jacobians of cov(β̂) with respect to (θ_free..., σ), each p×p row-major. */
  jacobians: Float64Array[];
  /** Eigenvalues of H (a non-positive one means the fit is not at a proper minimum). */
  hessianEigenvalues: number[];
  /** How the θ derivatives were taken ('differences' only as the fallback, see VarparOptions). */
  method: 'exact' | 'differences';
}

export interface VarparOptions {
  /**
   * 'exact' (default): the θ Hessian and ∂cov(β̂)/∂θ in closed form from one factorisation
   * (criterion.secondOrderPieces), falling back to 'differences' where a piece is not finite;
   * 'differences': central differences of the analytic gradient and of cov(β̂) (2 factorisations per θ_k).
   */
  method?: 'exact' | 'differences';
}

/** Asymptotic covariance of the variance parameters and Jacobians of cov(β̂), at θ̂ (σ̂ from θ̂). */
export function varparCovariance(objective: RemlObjective, theta: Float64Array, sigma: number, options: VarparOptions = {}): VarparCovariance {
  const freeComponents = [...theta].map((value, k) => k).filter((k) => theta[k] > 0);
  const exact = (options.method ?? 'exact') === 'exact' ? exactThetaDerivatives(objective, theta, sigma, freeComponents) : null;
  const { hessian, jacobians, centre } = exact ?? differencedThetaDerivatives(objective, theta, sigma, freeComponents);
  const degrees = objective.reml ? objective.frame.nObservations - objective.frame.nFixed : objective.frame.nObservations;
  // ∂pwrss/∂θ_i = −2‖u_i‖²/θ_i.
  const pwrssGradient = freeComponents.map((k) => (-2 * centre.modeSquares[k]) / theta[k]);
  const atOptimum = exact?.unscaledCovBeta ?? objective.unscaledCovBeta(theta);
  return { ...completeVarparCovariance(hessian, jacobians, pwrssGradient, centre.parts.pwrss, sigma, degrees, atOptimum), freeComponents, method: exact ? 'exact' : 'differences' };
}

/**
 * The rest of varparCovariance once the θ block is known: the σ row and column of the Hessian
 * (analytic), its pseudo-inverse 2H⁺, and the σ Jacobian of cov(β̂) = σ² × unscaledCovBeta.
 * @param hessian (m+1)×(m+1) row-major with the θ block of the free components filled
 * @param jacobians ∂cov(β̂)/∂θ_i of the free components; the σ Jacobian is appended
 * @param pwrssGradient ∂pwrss/∂θ_i of the free components
 */
export function completeVarparCovariance(
  hessian: Float64Array,
  jacobians: Float64Array[],
  pwrssGradient: number[],
  pwrss: number,
  sigma: number,
  degrees: number,
  unscaledCovBeta: Float64Array,
): Pick<VarparCovariance, 'covariance' | 'jacobians' | 'hessianEigenvalues'> {
  const m = pwrssGradient.length;
  const dimension = m + 1;
  const sigma2 = sigma * sigma;
  // σ derivatives of pwrss/σ² + (n − p) log(2πσ²), analytic.
  for (let i = 0; i < m; i++) {
    const value = (-2 * pwrssGradient[i]) / (sigma2 * sigma);
    hessian[i * dimension + m] = value;
    hessian[m * dimension + i] = value;
  }
  hessian[m * dimension + m] = (6 * pwrss) / (sigma2 * sigma2) - (2 * degrees) / sigma2;

  const eigen = symmetricEigen(hessian, dimension);
  const covariance = new Float64Array(dimension * dimension);
  eigen.values.forEach((value, index) => {
    if (!(value > 1e-8)) return;
    const vector = eigen.vectors[index];
    for (let i = 0; i < dimension; i++) {
      for (let j = 0; j < dimension; j++) covariance[i * dimension + j] += (2 * vector[i] * vector[j]) / value;
    }
  });
  jacobians.push(Float64Array.from(unscaledCovBeta, (value) => 2 * sigma * value));
  return { covariance, jacobians, hessianEigenvalues: eigen.values };
}

interface ThetaDerivatives {
  /** (m+1)×(m+1) row-major with the θ block filled. */
  hessian: Float64Array;
  /** σ² ∂(R_XᵀR_X)⁻¹/∂θ_i for each free component. */
  jacobians: Float64Array[];
  centre: { parts: { pwrss: number }; modeSquares: Float64Array };
  unscaledCovBeta?: Float64Array;
}

/**
 * ∂²h/∂θ_k∂θ_l = 4θ_kθ_l ∂²h/∂γ_k∂γ_l + δ_kl 2 ∂h/∂γ_k (γ = θ²) with the γ derivatives of
 * criterion.secondOrderPieces: −4‖δ_kl I − T_kl‖²/(θ_kθ_l) + 8θ_kθ_l yᵀPG_kPG_lPy/σ²
 * + δ_kl 2(q_k − tr T_kk − ‖u_k‖²/σ²)/γ_k. Null where a piece is not finite.
 */
function exactThetaDerivatives(objective: RemlObjective, theta: Float64Array, sigma: number, freeComponents: number[]): ThetaDerivatives | null {
  const pieces = objective.secondOrderPieces(theta);
  if (!pieces) return null;
  const m = freeComponents.length;
  const dimension = m + 1;
  const nTheta = objective.nTheta;
  const sigma2 = sigma * sigma;
  const termSizes = objective.frame.terms.map((term) => term.levels.length);
  const hessian = new Float64Array(dimension * dimension);
  for (let i = 0; i < m; i++) {
    const k = freeComponents[i];
    for (let j = 0; j < m; j++) {
      const l = freeComponents[j];
      let value = (-4 * pieces.traceProducts[k * nTheta + l]) / (theta[k] * theta[l]) + (8 * theta[k] * theta[l] * pieces.residualProducts[k * nTheta + l]) / sigma2;
      if (i === j) value += (2 * (termSizes[k] - pieces.traceT[k] - pieces.modeSquares[k] / sigma2)) / (theta[k] * theta[k]);
      hessian[i * dimension + j] = value;
    }
  }
  const jacobians = freeComponents.map((k) => Float64Array.from(pieces.unscaledCovBetaDerivatives[k], (value) => sigma2 * value));
  const finite = (values: Float64Array): boolean => values.every(Number.isFinite);
  if (!finite(hessian) || !jacobians.every(finite)) return null;
  return { hessian, jacobians, centre: pieces, unscaledCovBeta: pieces.unscaledCovBeta };
}

/** The θ block by central differences of the analytic gradient, and ∂cov(β̂)/∂θ by differences. */
function differencedThetaDerivatives(objective: RemlObjective, theta: Float64Array, sigma: number, freeComponents: number[]): ThetaDerivatives {
  const m = freeComponents.length;
  const dimension = m + 1;
  const sigma2 = sigma * sigma;

  const at = (shifts: Array<[number, number]>): Float64Array => {
    const point = theta.slice();
    for (const [index, delta] of shifts) point[freeComponents[index]] += delta;
    return point;
  };
  const termSizes = objective.frame.terms.map((term) => term.levels.length);
  // ∂h/∂θ_i of h(θ) = log|L|² (+ log|R_X|²) + pwrss/σ̂², the θ-dependent part of the deviance at
  // fixed σ̂, analytic (criterion.gradientPieces).
  const hGradient = (point: Float64Array): Float64Array => {
    const pieces = objective.gradientPieces(point);
    if (!pieces) throw new Error('the mixed-model equations are singular near the estimates');
    return Float64Array.from(freeComponents, (k) => (2 * (termSizes[k] - pieces.traceT[k] - pieces.modeSquares[k] / sigma2)) / point[k]);
  };
  const steps = freeComponents.map((k) => Math.max(1e-4 * theta[k], 1e-6));
  const centre = objective.gradientPieces(theta);
  if (!centre) throw new Error('the mixed-model equations are singular at the estimates');

  const hessian = new Float64Array(dimension * dimension);
  // One factorisation per point; the same points give the Jacobian of cov(β̂).
  const jacobians: Float64Array[] = [];
  for (let i = 0; i < m; i++) {
    const up = at([[i, steps[i]]]);
    const down = at([[i, -steps[i]]]);
    const gradientUp = hGradient(up);
    const covUp = objective.unscaledCovBeta(up);
    const gradientDown = hGradient(down);
    const covDown = objective.unscaledCovBeta(down);
    for (let j = 0; j < m; j++) hessian[j * dimension + i] = (gradientUp[j] - gradientDown[j]) / (2 * steps[i]);
    jacobians.push(Float64Array.from(covUp, (value, index) => (sigma2 * (value - covDown[index])) / (2 * steps[i])));
  }
  for (let i = 0; i < m; i++) {
    for (let j = 0; j < i; j++) {
      const mean = 0.5 * (hessian[i * dimension + j] + hessian[j * dimension + i]);
      hessian[i * dimension + j] = mean;
      hessian[j * dimension + i] = mean;
    }
  }
  return { hessian, jacobians, centre };
}

/**
 * lmerTest's contrast rows for the single fixed factor: t(doolittle(XᵀX)$L) without the
 * intercept row (its eps = 1e-6 zeroing included).
 */
export function productContrastRows(xTx: Float64Array, p: number): Float64Array[] {
  if (p < 2) return [];
  const eps = 1e-6;
  const lower = new Float64Array(p * p);
  const upper = new Float64Array(p * p);
  for (let i = 0; i < p; i++) lower[i * p + i] = 1;
  for (let i = 0; i < p; i++) {
    for (let j = 0; j < p; j++) {
      let value = xTx[i * p + j];
      for (let k = 0; k < i; k++) value -= lower[i * p + k] * upper[k * p + j];
      upper[i * p + j] = value;
    }
    for (let j = i + 1; j < p; j++) {
      let value = xTx[j * p + i];
      for (let k = 0; k < i; k++) value -= lower[j * p + k] * upper[k * p + i];
      lower[j * p + i] = Math.abs(upper[i * p + i]) < eps ? 0 : value / upper[i * p + i];
    }
  }
  // Typed rows: an array of small integers and one of doubles have different element kinds, and
  // the F-test's compiled code would be thrown away each time it met the other kind.
  const rows: Float64Array[] = [];
  for (let r = 1; r < p; r++) {
    const row = new Float64Array(p);
    for (let c = 0; c < p; c++) {
      const value = lower[c * p + r];
      row[c] = Math.abs(value) < eps ? 0 : value;
    }
    rows.push(row);
  }
  return rows;
}

export function quadraticForm(row: ArrayLike<number>, matrix: ArrayLike<number>, p: number): number {
  let sum = 0;
  for (let i = 0; i < p; i++) {
    if (row[i] === 0) continue;
    let inner = 0;
    for (let j = 0; j < p; j++) inner += matrix[i * p + j] * row[j];
    sum += row[i] * inner;
  }
  return sum;
}

/** lmerTest's get_Fstat_ddf. */
export function combineSatterthwaiteDf(nu: number[], tolerance = 1e-8): number {
  if (nu.length === 1) return nu[0];
  let allEqual = true;
  for (let i = 1; i < nu.length; i++) if (!(Math.abs(nu[i] - nu[i - 1]) < tolerance)) allEqual = false;
  if (allEqual) return nu.reduce((sum, value) => sum + value, 0) / nu.length;
  if (nu.some((value) => value <= 2)) return 2;
  const e = nu.reduce((sum, value) => sum + value / (value - 2), 0);
  return (2 * e) / (e - nu.length);
}

/** Multi-df F-test of the product term (contestMD / contest1D). */
export function productFTest(
  beta: Float64Array,
  covBeta: Float64Array,
  contrastRows: Float64Array[],
  varpar: Pick<VarparCovariance, 'covariance' | 'jacobians'> | null,
): ProductTest {
  const p = beta.length;
  const messages: string[] = [];
  const rows = contrastRows.length;
  if (rows === 0) return { F: null, numDf: 0, denDf: null, pValue: null, nuPerContrast: [], messages: ['only one product: no product test'] };
  const vl = new Float64Array(rows * rows);
  for (let i = 0; i < rows; i++) {
    for (let j = 0; j < rows; j++) {
      let sum = 0;
      for (let a = 0; a < p; a++) {
        if (contrastRows[i][a] === 0) continue;
        for (let b = 0; b < p; b++) sum += contrastRows[i][a] * covBeta[a * p + b] * contrastRows[j][b];
      }
      vl[i * rows + j] = sum;
    }
  }
  const eigen = symmetricEigen(vl, rows);
  const tolerance = Math.max(Math.sqrt(2.220446049250313e-16) * eigen.values[0], 0);
  const kept: number[] = [];
  for (let index = 0; index < eigen.values.length; index++) if (eigen.values[index] > tolerance) kept.push(index);
  const q = kept.length;
  if (q === 0) return { F: null, numDf: 0, denDf: null, pValue: null, nuPerContrast: [], messages: ['the product contrasts have no variance'] };
  let statistic = 0;
  const nu: number[] = [];
  for (const index of kept) {
    const vector = eigen.vectors[index];
    const ell = new Float64Array(p);
    for (let r = 0; r < rows; r++) for (let c = 0; c < p; c++) ell[c] += vector[r] * contrastRows[r][c];
    let estimate = 0;
    for (let c = 0; c < p; c++) estimate += ell[c] * beta[c];
    const variance = quadraticForm(ell, covBeta, p);
    statistic += (estimate * estimate) / variance;
    if (varpar) {
      const gradient = new Float64Array(varpar.jacobians.length);
      for (let k = 0; k < gradient.length; k++) gradient[k] = quadraticForm(ell, varpar.jacobians[k], p);
      const denominator = quadraticForm(gradient, varpar.covariance, gradient.length);
      nu.push((2 * variance * variance) / denominator);
    }
  }
  const F = statistic / q;
  if (!varpar) return { F, numDf: q, denDf: null, pValue: null, nuPerContrast: [], messages };
  const denDf = combineSatterthwaiteDf(nu);
  if (nu.some((value) => value <= 2)) messages.push('Satterthwaite df of some contrast is at most 2: denominator df set to 2 and unreliable');
  return { F, numDf: q, denDf, pValue: fUpperTail(F, q, denDf), nuPerContrast: nu, messages };
}
