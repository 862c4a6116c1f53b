/**
 * Stage 3 of a fit: minimise the profiled criterion over θ ≥ 0.
 *
 * The search runs over γ_k = θ_k² (variance ratios σ²_k/σ²): the criterion is an even
 * function of each θ_k, so in θ its slope at 0 is always zero and a bound cannot be told
 * apart from an interior point, while in γ the slope at 0 says whether the component wants
 * to leave the boundary (Karush–Kuhn–Tucker condition ∂f/∂γ_k ≥ 0 at γ_k = 0).
 * Method: projected quasi-Newton (BFGS on the free variables, Armijo backtracking along the
 * projected path) with analytic gradients where the criterion supplies them (differences
 * otherwise) and a first Hessian from differences of gradients, started from an ANOVA-type guess. With at
 * most three components every boundary face (each subset of components fixed at 0) is also
 * optimised and the lowest criterion wins.
 */
import { choleskyInPlace, inverseFromCholesky } from '../linalg/dense.js';

export interface OptimiserControl {
  maxIterations: number;
  /** Stop when the predicted decrease gᵀH g (H the inverse-Hessian estimate) is below this. */
  newtonDecrementTolerance: number;
  /** Stop when an accepted step changes the criterion by less than this relative amount. */
  relativeFunctionTolerance: number;
  /** Enumerate all boundary faces when there are at most this many components. */
  maxComponentsForFaceSearch: number;
}

export const DEFAULT_OPTIMISER_CONTROL: OptimiserControl = {
  maxIterations: 400,
  newtonDecrementTolerance: 1e-13,
  relativeFunctionTolerance: 1e-15,
  maxComponentsForFaceSearch: 3,
};

export interface OptimiserResult {
  theta: Float64Array;
  value: number;
  iterations: number;
  evaluations: number;
  converged: boolean;
  /** Projected gradient of the criterion with respect to γ = θ² at the answer. */
  projectedGradient: Float64Array;
  messages: string[];
}

export interface OptimiserHelpers {
  /**
   * A cheap approximation of the criterion's Hessian in γ at θ (row-major k×k), e.g. the average
   * information: used instead of Hessians from differences of gradients (k gradient evaluations
   * each) at the start and in the end game. Ignored where null or not positive definite. It
   * shapes the steps only; convergence is still judged on the gradient.
   */
  approximateHessian?: (theta: Float64Array) => Float64Array | null;
}

type Objective = (theta: ArrayLike<number>) => number;
/** Criterion and its gradient with respect to γ = θ² (NaN entries are filled by differences). */
type ObjectiveWithGradient = (theta: ArrayLike<number>) => { value: number; gradient: Float64Array };

interface GammaFunctions {
  f: (gamma: Float64Array) => number;
  fg: (gamma: Float64Array) => { value: number; gradient: Float64Array };
  hessian?: (gamma: Float64Array) => Float64Array | null;
}

export function minimizeBounded(
  objective: Objective,
  startTheta: ArrayLike<number>,
  control: Partial<OptimiserControl> = {},
  objectiveWithGradient?: ObjectiveWithGradient,
  helpers: OptimiserHelpers = {},
): OptimiserResult {
  const settings = { ...DEFAULT_OPTIMISER_CONTROL, ...control };
  const k = startTheta.length;
  let evaluations = 0;
  const toTheta = (gamma: Float64Array): Float64Array => Float64Array.from(gamma, (value) => Math.sqrt(Math.max(value, 0)));
  const f = (gamma: Float64Array): number => {
    evaluations++;
    return objective(toTheta(gamma));
  };
  const fg = (gamma: Float64Array): { value: number; gradient: Float64Array } => {
    if (!objectiveWithGradient) {
      const value = f(gamma);
      return { value, gradient: numericGradient(f, gamma, value, new Float64Array(k).fill(Number.NaN)) };
    }
    evaluations++;
    const result = objectiveWithGradient(toTheta(gamma));
    if (!Number.isFinite(result.value)) return result;
    return { value: result.value, gradient: numericGradient(f, gamma, result.value, result.gradient) };
  };
  const approximate = helpers.approximateHessian;
  const functions: GammaFunctions = { f, fg, hessian: approximate ? (gamma) => approximate(toTheta(gamma)) : undefined };
  const startGamma = Float64Array.from(startTheta, (value) => value * value);
  let best = searchFace(functions, startGamma, new Uint8Array(k), settings);
  if (k > 0 && k <= settings.maxComponentsForFaceSearch) {
    for (let mask = 1; mask < 1 << k; mask++) {
      const fixed = new Uint8Array(k);
      for (let i = 0; i < k; i++) fixed[i] = (mask >> i) & 1;
      const start = best.gamma.slice();
      let alreadyThere = true;
      for (let i = 0; i < k; i++) {
        if (fixed[i]) {
          if (start[i] !== 0) alreadyThere = false;
          start[i] = 0;
        }
      }
      if (alreadyThere) continue;
      const face = searchFace(functions, start, fixed, settings);
      if (face.value < best.value - 1e-10 * Math.abs(best.value)) {
        // A lower face: polish it without constraints so it can leave the boundary if it wants.
        const polished = searchFace(functions, face.gamma, new Uint8Array(k), settings);
        best = polished.value <= face.value ? polished : face;
        best.iterations += face.iterations;
      } else if (face.converged && face.value <= best.value + BOUNDARY_TIE_ABSOLUTE && zeroCount(face.gamma) > zeroCount(best.gamma)) {
        // As good as the interior answer: at an exact tie of two mean squares the criterion is
        // flat to fourth order in θ at the boundary and the search stops short of it, where the
        // Satterthwaite df would lie between the interior and the boundary answers.
        best = { ...face, iterations: best.iterations + face.iterations };
      }
    }
  }
  const projectedGradient = Float64Array.from(best.gradient, (g, i) => (best.gamma[i] === 0 ? Math.min(g, 0) : g));
  return {
    theta: toTheta(best.gamma),
    value: best.value,
    iterations: best.iterations,
    evaluations,
    converged: best.converged,
    projectedGradient,
    messages: [...best.messages],
  };
}

/**
 * A boundary face whose criterion is at most this much above the best point found is taken
 * instead of it (the same rule as the reference fixtures' test/fixtures/r/lmm.R, settle_on_boundary).
 */
export const BOUNDARY_TIE_ABSOLUTE = 1e-9;

function zeroCount(gamma: Float64Array): number {
  let zeros = 0;
  for (const value of gamma) if (value === 0) zeros++;
  return zeros;
}

interface FaceResult {
  gamma: Float64Array;
  value: number;
  gradient: Float64Array;
  iterations: number;
  converged: boolean;
  messages: string[];
}

/** Newton decrement below which the Hessian is estimated afresh once (see searchFace). */
const REFRESH_DECREMENT = 1;

function searchFace(functions: GammaFunctions, start: Float64Array, fixed: Uint8Array, settings: OptimiserControl): FaceResult {
  const k = start.length;
  let x: Float64Array = Float64Array.from(start, (value, i) => (fixed[i] ? 0 : Math.max(value, 0)));
  let current = functions.fg(x);
  let fx = current.value;
  let gradient = current.gradient;
  const result = (iterations: number, converged: boolean, messages: string[]): FaceResult => ({ gamma: x, value: fx, gradient, iterations, converged, messages });
  if (!Number.isFinite(fx)) return result(0, false, ['the criterion is not finite at the start']);
  if (fixed.every((flag) => flag === 1)) return result(0, true, []);
  let inverseHessian = diagonalInverse(x);
  let scaled = false;
  // Whether the Hessian in use was estimated close to the answer (then no refresh is needed).
  let refreshed = false;
  {
    // A start that is already the answer (balanced closed forms) needs no Hessian.
    const free = Uint8Array.from(x, (value, i) => (fixed[i] || (value === 0 && gradient[i] > 0) ? 0 : 1));
    const decrement = -dot(newtonDirection(inverseHessian, gradient, free), gradient);
    if (!(decrement > settings.newtonDecrementTolerance)) return result(1, true, []);
    const estimate = hessianEstimate(functions, x, gradient, fixed);
    if (estimate) {
      inverseHessian = estimate;
      scaled = true;
      // Estimated where the Newton decrement is already small: it is the end-game Hessian.
      refreshed = -dot(newtonDirection(inverseHessian, gradient, free), gradient) < REFRESH_DECREMENT;
    }
  }
  const messages: string[] = [];
  for (let iteration = 1; iteration <= settings.maxIterations; iteration++) {
    const free = Uint8Array.from(x, (value, i) => (fixed[i] || (value === 0 && gradient[i] > 0) ? 0 : 1));
    let direction = newtonDirection(inverseHessian, gradient, free);
    let slope = dot(direction, gradient);
    if (!refreshed && iteration > 1 && -slope < REFRESH_DECREMENT) {
      // Close to the answer: a Hessian from differences taken here (the first one was taken at
      // the start, often far away) turns the slow quasi-Newton end game into a few Newton steps.
      refreshed = true;
      const estimate = hessianEstimate(functions, x, gradient, fixed);
      if (estimate) {
        inverseHessian = estimate;
        scaled = true;
        direction = newtonDirection(inverseHessian, gradient, free);
        slope = dot(direction, gradient);
      }
    }
    if (!(slope < 0)) {
      inverseHessian = diagonalInverse(x);
      scaled = false;
      direction = newtonDirection(inverseHessian, gradient, free);
      slope = dot(direction, gradient);
    }
    const decrement = -slope;
    if (!(decrement > settings.newtonDecrementTolerance)) return result(iteration, true, messages);
    let step = 1;
    let accepted: Float64Array | null = null;
    let next = current;
    for (let attempt = 0; attempt < 60; attempt++) {
      const candidate = Float64Array.from(x, (value, i) => (free[i] ? Math.max(value + step * direction[i], 0) : value));
      // Armijo's test needs the value only; the gradient (with its differences at the bound) is
      // computed for the accepted point alone, reusing that point's factorisation.
      const trialValue = functions.f(candidate);
      let predicted = 0;
      for (let i = 0; i < k; i++) predicted += gradient[i] * (candidate[i] - x[i]);
      if (Number.isFinite(trialValue) && trialValue <= fx + 1e-4 * predicted) {
        accepted = candidate;
        next = functions.fg(candidate);
        break;
      }
      step *= 0.5;
      // Near convergence, once the predicted decrease is below the rounding noise of the
      // criterion, Armijo's test only compares noise: stop backtracking (tens of evaluations saved).
      if (decrement < 1e-8 && step * decrement < 1e-14 * Math.abs(fx)) break;
    }
    if (accepted === null) {
      // No decrease along the projected path: the gradient is at its noise level here.
      const converged = decrement < 1e-8;
      return result(iteration, converged, converged ? messages : [...messages, 'line search failed']);
    }
    const s = Float64Array.from(accepted, (value, i) => value - x[i]);
    const yDiff = Float64Array.from(next.gradient, (value, i) => value - gradient[i]);
    const change = fx - next.value;
    const previous = fx;
    x = accepted;
    current = next;
    fx = next.value;
    gradient = next.gradient;
    const sy = dot(s, yDiff);
    if (sy > 1e-14 * Math.sqrt(dot(s, s) * dot(yDiff, yDiff))) {
      if (!scaled) {
        // Shanno–Phua scaling of the first estimate: sᵀy / yᵀy.
        const factor = sy / dot(yDiff, yDiff);
        for (let i = 0; i < k; i++) for (let j = 0; j < k; j++) inverseHessian[i * k + j] = i === j ? factor : 0;
        scaled = true;
      }
      bfgsUpdate(inverseHessian, s, yDiff, sy);
    }
    if (change <= settings.relativeFunctionTolerance * Math.abs(previous) && decrement < 1e-9) return result(iteration, true, messages);
  }
  messages.push(`no convergence in ${settings.maxIterations} iterations`);
  return result(settings.maxIterations, false, messages);
}

/**
 * Fills the NaN entries of `gradient` by differences: central in the interior, second-order
 * one-sided next to the bound γ = 0.
 */
function numericGradient(f: (gamma: Float64Array) => number, x: Float64Array, fx: number, gradient: Float64Array): Float64Array {
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
function hessianEstimate(functions: GammaFunctions, x: Float64Array, gradient: Float64Array, fixed: Uint8Array): Float64Array | null {
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
function diagonalInverse(x: Float64Array): Float64Array {
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
function newtonDirection(inverseHessian: Float64Array, gradient: Float64Array, free: Uint8Array): Float64Array {
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

function bfgsUpdate(h: Float64Array, s: Float64Array, y: Float64Array, sy: number): void {
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

function dot(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let sum = 0;
  for (let i = 0; i < a.length; i++) sum += a[i] * b[i];
  return sum;
}
