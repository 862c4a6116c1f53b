/**
 * Stage 3 of a fit: minimise the profiled criterion over θ ≥ 0.
 *
 * The search runs over γ_k = θ_k² (variance ratios σ²_k/σ²): the criterion is an even
 * function of each θ_k, so in θ its slope at 0 is always zero and a bound cannot be told
 * apart from an interior point, while in γ the slope at 0 says whether the component wants
 * to leave the boundary (Karush–Kuhn–Tucker condition ∂f/∂γ_k ≥ 0 at γ_k = 0).
 * Method: projected quasi-Newton (BFGS on the free variables, Armijo backtracking along the
 * projected path), finite-difference gradients, started from an ANOVA-type guess. With at
 * most three components every boundary face (each subset of components fixed at 0) is also
 * optimised and the lowest criterion wins.
 */

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

type Objective = (theta: ArrayLike<number>) => number;

export function minimizeBounded(
  objective: Objective,
  startTheta: ArrayLike<number>,
  control: Partial<OptimiserControl> = {},
): OptimiserResult {
  const settings = { ...DEFAULT_OPTIMISER_CONTROL, ...control };
  const k = startTheta.length;
  let evaluations = 0;
  const f = (gamma: Float64Array): number => {
    evaluations++;
    const theta = new Float64Array(k);
    for (let i = 0; i < k; i++) theta[i] = Math.sqrt(Math.max(gamma[i], 0));
    return objective(theta);
  };
  const startGamma = Float64Array.from(startTheta, (value) => value * value);
  let best = searchFace(f, startGamma, new Uint8Array(k), settings);
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
      const face = searchFace(f, start, fixed, settings);
      if (face.value < best.value - 1e-10 * Math.abs(best.value)) {
        // A lower face: polish it without constraints so it can leave the boundary if it wants.
        const polished = searchFace(f, face.gamma, new Uint8Array(k), settings);
        best = polished.value <= face.value ? polished : face;
        best.iterations += face.iterations;
      }
    }
  }
  const messages = [...best.messages];
  const gradient = gradientAt(f, best.gamma, best.value).gradient;
  const projectedGradient = Float64Array.from(gradient, (g, i) => (best.gamma[i] === 0 ? Math.min(g, 0) : g));
  return {
    theta: Float64Array.from(best.gamma, (g) => Math.sqrt(g)),
    value: best.value,
    iterations: best.iterations,
    evaluations,
    converged: best.converged,
    projectedGradient,
    messages,
  };
}

interface FaceResult {
  gamma: Float64Array;
  value: number;
  iterations: number;
  converged: boolean;
  messages: string[];
}

function searchFace(f: (gamma: Float64Array) => number, start: Float64Array, fixed: Uint8Array, settings: OptimiserControl): FaceResult {
  const k = start.length;
  let x: Float64Array = Float64Array.from(start, (value, i) => (fixed[i] ? 0 : Math.max(value, 0)));
  let fx = f(x);
  if (!Number.isFinite(fx)) return { gamma: x, value: fx, iterations: 0, converged: false, messages: ['the criterion is not finite at the start'] };
  if (fixed.every((flag) => flag === 1)) return { gamma: x, value: fx, iterations: 0, converged: true, messages: [] };
  let { gradient, curvature } = gradientAt(f, x, fx);
  let inverseHessian = diagonalInverse(curvature, x);
  const messages: string[] = [];
  for (let iteration = 1; iteration <= settings.maxIterations; iteration++) {
    const free = Uint8Array.from(x, (value, i) => (fixed[i] || (value === 0 && gradient[i] > 0) ? 0 : 1));
    let direction = newtonDirection(inverseHessian, gradient, free);
    let slope = dot(direction, gradient);
    if (!(slope < 0)) {
      inverseHessian = diagonalInverse(curvature, x);
      direction = newtonDirection(inverseHessian, gradient, free);
      slope = dot(direction, gradient);
    }
    const decrement = -slope;
    if (!(decrement > settings.newtonDecrementTolerance)) {
      return { gamma: x, value: fx, iterations: iteration, converged: true, messages };
    }
    let step = 1;
    let accepted: Float64Array | null = null;
    let fNew = fx;
    for (let attempt = 0; attempt < 60; attempt++) {
      const candidate = Float64Array.from(x, (value, i) => (free[i] ? Math.max(value + step * direction[i], 0) : value));
      const value = f(candidate);
      let predicted = 0;
      for (let i = 0; i < k; i++) predicted += gradient[i] * (candidate[i] - x[i]);
      if (Number.isFinite(value) && value <= fx + 1e-4 * predicted) {
        accepted = candidate;
        fNew = value;
        break;
      }
      step *= 0.5;
    }
    if (accepted === null) {
      // No decrease along the projected path: the gradient is at its noise level here.
      return { gamma: x, value: fx, iterations: iteration, converged: decrement < 1e-8, messages: decrement < 1e-8 ? messages : [...messages, 'line search failed'] };
    }
    const next = gradientAt(f, accepted, fNew);
    const s = Float64Array.from(accepted, (value, i) => value - x[i]);
    const yDiff = Float64Array.from(next.gradient, (value, i) => value - gradient[i]);
    const change = fx - fNew;
    x = accepted;
    const previous = fx;
    fx = fNew;
    gradient = next.gradient;
    curvature = next.curvature;
    const sy = dot(s, yDiff);
    if (sy > 1e-14 * Math.sqrt(dot(s, s) * dot(yDiff, yDiff))) bfgsUpdate(inverseHessian, s, yDiff, sy);
    if (change <= settings.relativeFunctionTolerance * Math.abs(previous) && decrement < 1e-9) {
      return { gamma: x, value: fx, iterations: iteration, converged: true, messages };
    }
  }
  messages.push(`no convergence in ${settings.maxIterations} iterations`);
  return { gamma: x, value: fx, iterations: settings.maxIterations, converged: false, messages };
}

/** Central differences in the interior, second-order one-sided differences next to the bound. */
function gradientAt(f: (gamma: Float64Array) => number, x: Float64Array, fx: number): { gradient: Float64Array; curvature: Float64Array } {
  const k = x.length;
  const gradient = new Float64Array(k);
  const curvature = new Float64Array(k);
  const probe = x.slice();
  for (let i = 0; i < k; i++) {
    const h = Math.max(1e-4 * x[i], 1e-6);
    if (x[i] - h >= 0) {
      probe[i] = x[i] + h;
      const up = f(probe);
      probe[i] = x[i] - h;
      const down = f(probe);
      gradient[i] = (up - down) / (2 * h);
      curvature[i] = (up - 2 * fx + down) / (h * h);
    } else {
      probe[i] = x[i] + h;
      const one = f(probe);
      probe[i] = x[i] + 2 * h;
      const two = f(probe);
      gradient[i] = (-3 * fx + 4 * one - two) / (2 * h);
      curvature[i] = (fx - 2 * one + two) / (h * h);
    }
    probe[i] = x[i];
  }
  return { gradient, curvature };
}

function diagonalInverse(curvature: Float64Array, x: Float64Array): Float64Array {
  const k = curvature.length;
  const matrix = new Float64Array(k * k);
  for (let i = 0; i < k; i++) {
    // Fall back to a step of the order of the current value when the curvature is not positive.
    const fallback = 1 / Math.max(x[i] * x[i], 1e-2);
    matrix[i * k + i] = curvature[i] > 0 && Number.isFinite(curvature[i]) ? 1 / curvature[i] : 1 / fallback;
  }
  return matrix;
}

function newtonDirection(inverseHessian: Float64Array, gradient: Float64Array, free: Uint8Array): Float64Array {
  const k = gradient.length;
  const direction = new Float64Array(k);
  for (let i = 0; i < k; i++) {
    if (!free[i]) continue;
    let sum = 0;
    for (let j = 0; j < k; j++) if (free[j]) sum += inverseHessian[i * k + j] * gradient[j];
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
