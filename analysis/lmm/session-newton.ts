/**
 * Minimises the one-session REML criterion over γ = θ² ≥ 0 (methods §1.9) by Newton steps with the exact
 * Hessian (session-criterion-hessian.ts): a projected Newton method with an active set for the
 * bounds (Nocedal & Wright 2006, Numerical Optimization, 2nd ed., section 16.7 gradient projection and
 * section 3.4 Hessian modification; Bertsekas 1982, SIAM J. Control Optim. 20:221, projected Newton).
 *
 * - A component at γ_k = 0 is held there while ∂f/∂γ_k > 0 (the Karush–Kuhn–Tucker sign: moving
 *   inwards would raise the criterion), or while the Newton step on the others would push it
 *   below 0; otherwise it is free. The boundary face is thus read off the gradient at the bound
 *   instead of being searched.
 * - The step solves the free block of the Hessian; where that block is not positive definite
 *   (far from the answer the criterion need not be convex in γ), its eigenvalues are replaced by
 *   their absolute values, floored, so the step still descends.
 * - The step is projected onto γ ≥ 0 and halved until Armijo's sufficient decrease holds.
 * - Converged when the Newton decrement −gᵀd on the free components is below 1e-13 (the
 *   tolerance of the general optimiser, optimise.ts), with the same rule for the rounding noise
 *   of the line search.
 * - At an exact tie of mean squares the criterion is flat at the boundary and rounding leaves a
 *   component a hair above 0: when the quadratic model says a boundary face costs less than
 *   1e-6 in the criterion, that face is fitted too and taken when it is within
 *   BOUNDARY_TIE_ABSOLUTE of the interior answer (the rule of the reference fixtures).
 *
 * One evaluation of value, gradient and Hessian per iteration (plus halvings, rare near the
 * answer); typically 3–6 from the moment start. Work arrays are allocated once per fit.
 */
import { BOUNDARY_TIE_ABSOLUTE, DEFAULT_OPTIMISER_CONTROL, type OptimiserResult } from './optimise.js';
import type { SessionSecondOrder } from './session-criterion-hessian.js';

/** Name of this optimiser in the fit diagnostics. */
export const SESSION_NEWTON_NAME = 'projected-newton(gamma)';

const MAX_ITERATIONS = 100;
/** A boundary face whose predicted cost (quadratic model) is below this is fitted and compared. */
const TIE_PROBE = 1e-6;
const ARMIJO = 1e-4;

/** The optimiser's result, with the answer also in γ (θ² may differ from it in the last bit). */
export interface SessionNewtonResult extends OptimiserResult {
  gamma: Float64Array;
}

export function minimizeSessionNewton(second: SessionSecondOrder, startTheta: ArrayLike<number>): SessionNewtonResult {
  const k = second.nComponents;
  const tolerance = DEFAULT_OPTIMISER_CONTROL.newtonDecrementTolerance;
  const gamma = new Float64Array(k);
  const trial = new Float64Array(k);
  const gradient = new Float64Array(k);
  const hessian = new Float64Array(k * k);
  const direction = new Float64Array(k);
  const free = new Uint8Array(k);
  let evaluations = 0;

  const evaluate = (point: Float64Array): number => {
    evaluations++;
    return second.evaluate(point[0], k > 1 ? point[1] : 0);
  };

  interface Run {
    gamma: Float64Array;
    value: number;
    gradient: Float64Array;
    hessian: Float64Array;
    iterations: number;
    converged: boolean;
    message: string | null;
  }

  /** Newton iterations from `start`, components with `fixed[i]` held at 0. */
  function run(start: ArrayLike<number>, fixed: Uint8Array): Run {
    for (let i = 0; i < k; i++) gamma[i] = fixed[i] ? 0 : Math.max(start[i], 0);
    let value = evaluate(gamma);
    const finish = (iterations: number, converged: boolean, message: string | null): Run => ({
      gamma: gamma.slice(),
      value,
      gradient: gradient.slice(),
      hessian: hessian.slice(),
      iterations,
      converged,
      message,
    });
    if (!Number.isFinite(value)) return finish(0, false, 'the criterion is not finite at the start');
    gradient.set(second.gradient);
    hessian.set(second.hessian);
    for (let iteration = 1; iteration <= MAX_ITERATIONS; iteration++) {
      for (let i = 0; i < k; i++) free[i] = fixed[i] || (gamma[i] === 0 && gradient[i] > 0) ? 0 : 1;
      newtonStep(hessian, gradient, free, direction, k);
      // A free component at the bound that the step would push outwards is held there too.
      for (let i = 0; i < k; i++) {
        if (free[i] && gamma[i] === 0 && direction[i] < 0) {
          free[i] = 0;
          newtonStep(hessian, gradient, free, direction, k);
          i = -1;
        }
      }
      let decrement = 0;
      for (let i = 0; i < k; i++) decrement -= gradient[i] * direction[i];
      if (!(decrement > tolerance)) return finish(iteration, true, null);
      let step = 1;
      let accepted = false;
      let trialValue = value;
      for (let attempt = 0; attempt < 60; attempt++) {
        let predicted = 0;
        for (let i = 0; i < k; i++) {
          trial[i] = free[i] ? Math.max(gamma[i] + step * direction[i], 0) : gamma[i];
          predicted += gradient[i] * (trial[i] - gamma[i]);
        }
        trialValue = evaluate(trial);
        if (Number.isFinite(trialValue) && trialValue <= value + ARMIJO * predicted) {
          accepted = true;
          break;
        }
        step *= 0.5;
        // Once the predicted decrease is below the criterion's rounding, Armijo only compares noise.
        if (decrement < 1e-8 && step * decrement < 1e-14 * Math.abs(value)) break;
      }
      if (!accepted) {
        const converged = decrement < 1e-8;
        return finish(iteration, converged, converged ? null : 'line search failed');
      }
      const previous = value;
      gamma.set(trial);
      value = trialValue;
      gradient.set(second.gradient);
      hessian.set(second.hessian);
      if (previous - value <= DEFAULT_OPTIMISER_CONTROL.relativeFunctionTolerance * Math.abs(previous) && decrement < 1e-9) {
        return finish(iteration, true, null);
      }
    }
    return finish(MAX_ITERATIONS, false, `no convergence in ${MAX_ITERATIONS} iterations`);
  }

  let best = run(startTheta.length === k ? Float64Array.from(startTheta, (theta) => theta * theta) : new Float64Array(k).fill(0.25), new Uint8Array(k));
  let iterations = best.iterations;
  if (best.converged) {
    const interior = best;
    for (let mask = 1; mask < 1 << k; mask++) {
      const fixed = new Uint8Array(k);
      let alreadyThere = true;
      for (let i = 0; i < k; i++) {
        fixed[i] = (mask >> i) & 1;
        if (fixed[i] && best.gamma[i] !== 0) alreadyThere = false;
      }
      if (alreadyThere || !(faceCost(interior, fixed, k) < TIE_PROBE)) continue;
      const face = run(interior.gamma, fixed);
      iterations += face.iterations;
      if (face.converged && face.value <= best.value + BOUNDARY_TIE_ABSOLUTE && zeros(face.gamma) > zeros(best.gamma)) best = face;
    }
  }
  const projectedGradient = Float64Array.from(best.gradient, (g, i) => (best.gamma[i] === 0 ? Math.min(g, 0) : g));
  return {
    theta: Float64Array.from(best.gamma, (value) => Math.sqrt(value)),
    gamma: best.gamma,
    value: best.value,
    iterations,
    evaluations,
    converged: best.converged,
    projectedGradient,
    messages: best.message ? [best.message] : [],
  };
}

function zeros(gamma: Float64Array): number {
  let count = 0;
  for (const value of gamma) if (value === 0) count++;
  return count;
}

/**
 * The quadratic model's rise of the criterion when the components in `fixed` are set to 0 and
 * the others re-optimised: ½ γ_Sᵀ [(∇²f)⁻¹_SS]⁻¹ γ_S. Infinity where the Hessian is not positive definite.
 */
function faceCost(at: { gamma: Float64Array; hessian: Float64Array }, fixed: Uint8Array, k: number): number {
  const h = at.hessian;
  if (k === 1) return h[0] > 0 ? 0.5 * h[0] * at.gamma[0] * at.gamma[0] : Number.POSITIVE_INFINITY;
  const determinant = h[0] * h[3] - h[1] * h[2];
  if (!(h[0] > 0 && determinant > 0)) return Number.POSITIVE_INFINITY;
  if (fixed[0] && fixed[1]) {
    const g0 = at.gamma[0];
    const g1 = at.gamma[1];
    return 0.5 * (h[0] * g0 * g0 + 2 * h[1] * g0 * g1 + h[3] * g1 * g1);
  }
  // One component i fixed: the Schur complement h_ii − h_ij²/h_jj.
  const i = fixed[0] ? 0 : 1;
  const schur = determinant / h[(1 - i) * 3];
  return 0.5 * schur * at.gamma[i] * at.gamma[i];
}

/**
 * d = −(B_FF)⁻¹ g_F on the free components (0 elsewhere), B the Hessian with non-positive
 * eigenvalues of its free block replaced by their absolute values, floored at 1e-8 × its scale.
 */
function newtonStep(hessian: Float64Array, gradient: Float64Array, free: Uint8Array, direction: Float64Array, k: number): void {
  direction.fill(0);
  if (k === 1 || !free[0] || !free[1]) {
    const i = k === 1 || free[0] ? 0 : 1;
    if (!free[i]) return;
    const h = hessian[i * k + i];
    direction[i] = -gradient[i] / Math.max(Math.abs(h), 1e-8 * Math.max(1, Math.abs(h)), 1e-12);
    return;
  }
  const a = hessian[0];
  const b = 0.5 * (hessian[1] + hessian[2]);
  const c = hessian[3];
  const determinant = a * c - b * b;
  if (a > 0 && determinant > 1e-14 * Math.max(a * c, b * b)) {
    direction[0] = -(c * gradient[0] - b * gradient[1]) / determinant;
    direction[1] = -(a * gradient[1] - b * gradient[0]) / determinant;
    return;
  }
  // Eigen-decomposition of the symmetric 2 × 2 block, eigenvalues made positive.
  const mean = 0.5 * (a + c);
  const radius = Math.hypot(0.5 * (a - c), b);
  const floor = 1e-8 * Math.max(1, Math.abs(mean) + radius);
  const lambda1 = Math.max(Math.abs(mean + radius), floor);
  const lambda2 = Math.max(Math.abs(mean - radius), floor);
  // Eigenvector of mean + radius: (b, λ − a) or (λ − c, b), whichever is better conditioned.
  let x = b;
  let y = mean + radius - a;
  if (Math.hypot(x, y) < 1e-300) {
    x = mean + radius - c;
    y = b;
  }
  let norm = Math.hypot(x, y);
  if (!(norm > 0)) {
    x = 1;
    y = 0;
    norm = 1;
  }
  x /= norm;
  y /= norm;
  // v1 = (x, y), v2 = (−y, x); d = −Σ v (vᵀg)/|λ|.
  const along1 = x * gradient[0] + y * gradient[1];
  const along2 = -y * gradient[0] + x * gradient[1];
  direction[0] = -(x * along1) / lambda1 - (-y * along2) / lambda2;
  direction[1] = -(y * along1) / lambda1 - (x * along2) / lambda2;
}
