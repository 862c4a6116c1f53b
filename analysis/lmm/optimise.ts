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
 * Stages: this module (the parametrisation in γ and the choice among boundary faces),
 * optimise-face.ts (the search on one face), optimise-hessian.ts (Hessian estimates, Newton
 * directions on the free variables, BFGS updates, difference gradients).
 */
import { searchFace } from './optimise-face.js';
import { numericGradient, type GammaFunctions } from './optimise-hessian.js';

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

