/**
 * The exact second derivatives of the one-session REML criterion in γ = θ²
 * (session-criterion-hessian.ts) against central differences of the criterion and of its
 * gradient, and ∂C⁻¹/∂γ against differences of C⁻¹; then the Newton search (session-newton.ts)
 * against the general quasi-Newton optimiser with its boundary-face search (optimise.ts) on the
 * same criterion: same minimum, far fewer evaluations. Sessions invented (unbalanced-session.ts);
 * the fits themselves are checked against lme4/lmerTest in lme4-reference.test.ts.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';
import { minimizeBounded } from '../../../analysis/lmm/optimise.js';
import type { SessionCriterion } from '../../../analysis/lmm/session-criterion.js';
import { makeSessionSecondOrder } from '../../../analysis/lmm/session-criterion-hessian.js';
import { minimizeSessionNewton } from '../../../analysis/lmm/session-newton.js';
import { sessionCriterionOf, unbalancedSession } from './unbalanced-session.js';

function criterionOf(observations: Observation[], withInteraction: boolean): SessionCriterion | null {
  const nAssessors = new Set(observations.map((row) => row.assessor)).size;
  const nProducts = new Set(observations.map((row) => row.product)).size;
  if (nAssessors < 2 || nProducts < 2 || observations.length <= nProducts + 2) return null;
  return sessionCriterionOf(observations, withInteraction);
}

const sessions = fc.record({
  seed: fc.integer({ min: 1, max: 1_000_000 }),
  nAssessors: fc.integer({ min: 2, max: 10 }),
  nProducts: fc.integer({ min: 2, max: 7 }),
  dropShare: fc.constantFrom(0.03, 0.1, 0.25),
  sdAssessor: fc.constantFrom(0, 0.3, 1),
  sdInteraction: fc.constantFrom(0, 0.2, 0.6),
  withInteraction: fc.boolean(),
});

describe('exact derivatives of the cell-sum criterion in γ', () => {
  it('gradient and Hessian equal central differences (interior and γ_k = 0)', () => {
    fc.assert(
      fc.property(sessions, fc.constantFrom([0.4, 0.9], [0, 0.3], [1.7, 0], [0.02, 0.05]), (design, gammaPoint) => {
        const observations = unbalancedSession(design.seed, design.nAssessors, design.nProducts, design.dropShare, design.sdAssessor, design.sdInteraction);
        const criterion = criterionOf(observations, design.withInteraction);
        if (!criterion) return;
        const second = makeSessionSecondOrder(criterion);
        const k = second.nComponents;
        const gamma = gammaPoint.slice(0, k);
        const at = (point: number[]): number => second.evaluate(point[0], k > 1 ? point[1] : 0);
        const value = at(gamma);
        if (!Number.isFinite(value)) return;
        const gradient = [...second.gradient];
        const hessian = [...second.hessian];
        const h = 1e-5;
        for (let i = 0; i < k; i++) {
          const up = gamma.slice();
          const down = gamma.slice();
          up[i] += h;
          down[i] -= h; // the criterion is smooth in γ a little below 0, so central differences hold at the bound
          const valueUp = at(up);
          const gradientUp = [...second.gradient];
          const valueDown = at(down);
          const gradientDown = [...second.gradient];
          const scale = Math.max(1, Math.abs(gradient[i]));
          expect(Math.abs((valueUp - valueDown) / (2 * h) - gradient[i]) / scale, `gradient ${i}`).toBeLessThan(1e-5);
          for (let j = 0; j < k; j++) {
            const difference = (gradientUp[j] - gradientDown[j]) / (2 * h);
            expect(Math.abs(difference - hessian[j * k + i]) / Math.max(1, Math.abs(hessian[j * k + i])), `Hessian ${j},${i}`).toBeLessThan(1e-5);
          }
        }
      }),
      { numRuns: 150, seed: 41 },
    );
  });

  it('∂C⁻¹/∂γ and the fixed-σ derivatives equal differences', () => {
    fc.assert(
      fc.property(sessions, (design) => {
        const observations = unbalancedSession(design.seed, design.nAssessors, design.nProducts, design.dropShare, design.sdAssessor, design.sdInteraction);
        const criterion = criterionOf(observations, design.withInteraction);
        if (!criterion) return;
        const second = makeSessionSecondOrder(criterion);
        const k = second.nComponents;
        const p = criterion.nProducts;
        const gamma = [0.6, 0.3].slice(0, k);
        const sigma2 = 0.8;
        if (!Number.isFinite(second.evaluate(gamma[0], gamma[1] ?? 0))) return;
        const gradient = new Float64Array(k);
        const hessian = new Float64Array(k * k);
        const derivatives = Array.from({ length: k }, () => new Float64Array(p * p));
        second.fixedSigma(sigma2, gradient, hessian, derivatives);
        // h(γ) = log|H| + log|C| + pwrss/σ² = REMLcrit − (N − P)(1 + log 2π pwrss/(N − P)) + pwrss/σ².
        const degrees = criterion.nObservations - p;
        const h = (point: number[]): { value: number; inverse: Float64Array } => {
          const theta = point.map(Math.sqrt);
          const solution = criterion.solution(theta)!;
          const value = solution.deviance - degrees * (1 + Math.log((2 * Math.PI * solution.pwrss) / degrees)) + solution.pwrss / sigma2;
          return { value, inverse: solution.unscaledCovMeans };
        };
        const step = 1e-5;
        for (let i = 0; i < k; i++) {
          const up = gamma.slice();
          const down = gamma.slice();
          up[i] += step;
          down[i] -= step;
          const atUp = h(up);
          const atDown = h(down);
          expect(Math.abs((atUp.value - atDown.value) / (2 * step) - gradient[i]) / Math.max(1, Math.abs(gradient[i]))).toBeLessThan(1e-6);
          for (let m = 0; m < p * p; m++) {
            const difference = (atUp.inverse[m] - atDown.inverse[m]) / (2 * step);
            expect(Math.abs(difference - derivatives[i][m]), `∂C⁻¹/∂γ_${i} [${m}]`).toBeLessThan(1e-6 * Math.max(1, Math.abs(derivatives[i][m])));
          }
        }
      }),
      { numRuns: 100, seed: 43 },
    );
  });
});

describe('Newton search with the exact Hessian', () => {
  it('reaches the minimum of the quasi-Newton search with its face search, in fewer evaluations', () => {
    const newtonEvaluations: number[] = [];
    const searchEvaluations: number[] = [];
    let boundary = 0;
    fc.assert(
      fc.property(sessions, (design) => {
        const observations = unbalancedSession(design.seed, design.nAssessors, design.nProducts, design.dropShare, design.sdAssessor, design.sdInteraction);
        const criterion = criterionOf(observations, design.withInteraction);
        if (!criterion) return;
        const start = criterion.momentStart();
        const reference = minimizeBounded(criterion.evaluate, start, {}, criterion.valueAndGradient);
        if (!reference.converged) return;
        const newton = minimizeSessionNewton(makeSessionSecondOrder(criterion), start);
        expect(newton.converged).toBe(true);
        // The same minimum: criterion to 1e-9 (the boundary tie rule's scale), variance ratios close.
        expect(Math.abs(newton.value - reference.value), `criterion ${newton.value} vs ${reference.value}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(reference.value)));
        for (let i = 0; i < start.length; i++) {
          const gammaNewton = newton.theta[i] ** 2;
          const gammaReference = reference.theta[i] ** 2;
          expect(Math.abs(gammaNewton - gammaReference), `γ_${i}: ${gammaNewton} vs ${gammaReference}`).toBeLessThanOrEqual(1e-4 * Math.max(0.1, gammaReference));
          // On the boundary exactly when the reference is.
          expect(gammaNewton === 0, `γ_${i} at 0`).toBe(gammaReference === 0);
          if (gammaReference === 0) boundary++;
        }
        newtonEvaluations.push(newton.evaluations);
        searchEvaluations.push(reference.evaluations);
      }),
      { numRuns: 300, seed: 47 },
    );
    const median = (values: number[]): number => [...values].sort((a, b) => a - b)[values.length >> 1];
    expect(newtonEvaluations.length).toBeGreaterThan(200);
    expect(boundary).toBeGreaterThan(20);
    expect(median(newtonEvaluations)).toBeLessThan(median(searchEvaluations) / 3);
  });
});
