/**
 * The search on one boundary face of the bounded optimiser (optimise.ts): projected
 * quasi-Newton in γ with some components fixed at 0, Armijo backtracking along the projected
 * path, a Hessian estimate at the start and a fresh one near the answer.
 */
import type { OptimiserControl } from './optimise.js';
import { bfgsUpdate, diagonalInverse, dot, hessianEstimate, newtonDirection, type GammaFunctions } from './optimise-hessian.js';

export interface FaceResult {
  gamma: Float64Array;
  value: number;
  gradient: Float64Array;
  iterations: number;
  converged: boolean;
  messages: string[];
}

/** Newton decrement below which the Hessian is estimated afresh once (see searchFace). */
const REFRESH_DECREMENT = 1;

export function searchFace(functions: GammaFunctions, start: Float64Array, fixed: Uint8Array, settings: OptimiserControl): FaceResult {
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

