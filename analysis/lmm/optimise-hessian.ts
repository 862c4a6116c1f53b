/**
 * Second-order helpers of the bounded optimiser (optimise.ts, optimise-face.ts), all in γ = θ²:
 * Hessian estimates (the caller's approximation or differences of gradients) and their inverses
 * on the free components, Newton directions, the BFGS update, and gradients by differences
 * where the criterion gives none.
 */
import { choleskyInPlace, inverseFromCholesky } from '../linalg/dense.js';

/** The criterion in γ: value, value and gradient, and an optional cheap Hessian approximation. */
export interface GammaFunctions {
  f: (gamma: Float64Array) => number;
  fg: (gamma: Float64Array) => { value: number; gradient: Float64Array };
  hessian?: (gamma: Float64Array) => Float64Array | null;
}

/**
 * Fills the NaN entries of `gradient` by differences: central in the interior, second-order
 * one-sided next to the bound γ = 0.
 */
export function numericGradient(f: (gamma: Float64Array) => number, x: Float64Array, fx: number, gradient: Float64Array): Float64Array {
  const k = x.length;
  const result = gradient.slice();
  const probe = x.slice();
  for (let i = 0; i < k; i++) {
    if (!Number.isNaN(result[i])) continue;
    const h = Math.max(1e-4 * x[i], 1e-6);
    if (x[i] - h >= 0) {
      probe[i] = x[i] + h;
      const up = f(probe);
      probe[i] = x[i] - h;
      const down = f(probe);
      result[i] = (up - down) / (2 * h);
    } else {
      probe[i] = x[i] + h;
      const one = f(probe);
      probe[i] = x[i] + 2 * h;
      const two = f(probe);
      result[i] = (-3 * fx + 4 * one - two) / (2 * h);
    }
    probe[i] = x[i];
  }
  return result;
}

/**
 * The inverse of a Hessian estimate at x: the caller's approximation when it has one and it is
 * positive definite, else differences of gradients. Null when neither is positive definite.
 */
export function hessianEstimate(functions: GammaFunctions, x: Float64Array, gradient: Float64Array, fixed: Uint8Array): Float64Array | null {
  const approximation = functions.hessian?.(x);
  const inverse = approximation && wellConditioned(approximation, fixed) ? invertOnFree(approximation, fixed) : null;
  return inverse ?? finiteDifferenceHessian(functions, x, gradient, fixed);
}

/**
 * Whether an approximate Hessian determines every free direction: a component the data cannot
 * inform (e.g. a term spanned by the fixed effects) has a vanishing row in the average
 * information, and its inverse would send that component towards infinity.
 */
function wellConditioned(hessian: Float64Array, fixed: Uint8Array): boolean {
  const k = fixed.length;
  let largest = 0;
  for (let i = 0; i < k; i++) if (!fixed[i]) largest = Math.max(largest, Math.abs(hessian[i * k + i]));
  const factor = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    for (let j = 0; j < k; j++) factor[i * k + j] = fixed[i] || fixed[j] ? (i === j ? 1 : 0) : hessian[i * k + j];
  }
  if (!(largest > 0) || !choleskyInPlace(factor, k)) return false;
  for (let i = 0; i < k; i++) {
    if (fixed[i]) continue;
    // Relative pivot: the part of the curvature of component i not explained by the others.
    if (!(factor[i * k + i] ** 2 > 1e-10 * hessian[i * k + i]) || !(hessian[i * k + i] > 1e-10 * largest)) return false;
  }
  return true;
}

/**
 * The inverse of the Hessian from forward differences of the gradient (k gradient evaluations):
 * with it the quasi-Newton steps are Newton steps. Null when the estimate is not positive definite.
 */
function finiteDifferenceHessian(functions: GammaFunctions, x: Float64Array, gradient: Float64Array, fixed: Uint8Array): Float64Array | null {
  const k = x.length;
  const hessian = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    if (fixed[i]) continue;
    const h = 1e-4 * Math.max(x[i], 1e-2);
    const probe = x.slice();
    probe[i] += h;
    const shifted = functions.fg(probe);
    if (!Number.isFinite(shifted.value)) return null;
    for (let j = 0; j < k; j++) if (!fixed[j]) hessian[j * k + i] = (shifted.gradient[j] - gradient[j]) / h;
  }
  for (let i = 0; i < k; i++) {
    for (let j = 0; j < i; j++) {
      const mean = 0.5 * (hessian[i * k + j] + hessian[j * k + i]);
      hessian[i * k + j] = mean;
      hessian[j * k + i] = mean;
    }
  }
  return invertOnFree(hessian, fixed);
}

/**
 * The inverse of the Hessian with unit rows and columns for the fixed components; null when
 * not positive definite (or not finite) on the free components.
 */
function invertOnFree(source: Float64Array, fixed: Uint8Array): Float64Array | null {
  const k = fixed.length;
  if (source.length !== k * k) return null;
  const hessian = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    for (let j = 0; j < k; j++) hessian[i * k + j] = fixed[i] || fixed[j] ? (i === j ? 1 : 0) : source[i * k + j];
  }
  if (!hessian.every(Number.isFinite)) return null;
  const factor = hessian.slice();
  if (!choleskyInPlace(factor, k)) return null;
  return inverseFromCholesky(factor, k);
}

/** First inverse-Hessian guess: steps of the order of the current value (rescaled after one step). */
export function diagonalInverse(x: Float64Array): Float64Array {
  const k = x.length;
  const matrix = new Float64Array(k * k);
  for (let i = 0; i < k; i++) matrix[i * k + i] = Math.max(x[i] * x[i], 1e-2) / 10;
  return matrix;
}

/**
 * Newton direction on the free variables: −(B_FF)⁻¹ g_F with B the Hessian estimate. From the
 * inverse-Hessian estimate H = B⁻¹ this is the Schur complement H_FF − H_FA H_AA⁻¹ H_AF
 * (the plain block H_FF would be wrong whenever the bound variables are correlated with the free ones).
 */
export function newtonDirection(inverseHessian: Float64Array, gradient: Float64Array, free: Uint8Array): Float64Array {
  const k = gradient.length;
  const direction = new Float64Array(k);
  const freeIndex: number[] = [];
  const boundIndex: number[] = [];
  for (let i = 0; i < k; i++) (free[i] ? freeIndex : boundIndex).push(i);
  const reduced = (i: number, j: number): number => inverseHessian[i * k + j];
  let correction: ((i: number, j: number) => number) | null = null;
  if (boundIndex.length > 0 && freeIndex.length > 0) {
    const m = boundIndex.length;
    const haa = new Float64Array(m * m);
    boundIndex.forEach((a, r) => boundIndex.forEach((b, c) => (haa[r * m + c] = inverseHessian[a * k + b])));
    if (choleskyInPlace(haa, m)) {
      const haaInverse = inverseFromCholesky(haa, m);
      correction = (i, j) => {
        let sum = 0;
        for (let r = 0; r < m; r++) {
          for (let c = 0; c < m; c++) sum += inverseHessian[i * k + boundIndex[r]] * haaInverse[r * m + c] * inverseHessian[boundIndex[c] * k + j];
        }
        return sum;
      };
    }
  }
  for (const i of freeIndex) {
    let sum = 0;
    for (const j of freeIndex) sum += (reduced(i, j) - (correction ? correction(i, j) : 0)) * gradient[j];
    direction[i] = -sum;
  }
  return direction;
}

export function bfgsUpdate(h: Float64Array, s: Float64Array, y: Float64Array, sy: number): void {
  const k = s.length;
  const hy = new Float64Array(k);
  for (let i = 0; i < k; i++) {
    let sum = 0;
    for (let j = 0; j < k; j++) sum += h[i * k + j] * y[j];
    hy[i] = sum;
  }
  const yhy = dot(y, hy);
  const factor = (sy + yhy) / (sy * sy);
  for (let i = 0; i < k; i++) {
    for (let j = 0; j < k; j++) {
      h[i * k + j] += factor * s[i] * s[j] - (hy[i] * s[j] + s[i] * hy[j]) / sy;
    }
  }
}

export function dot(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let sum = 0;
  for (let i = 0; i < a.length; i++) sum += a[i] * b[i];
  return sum;
}
