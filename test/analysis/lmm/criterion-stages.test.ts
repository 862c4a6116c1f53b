/**
 * The criterion's stages share one factor per θ (analysis/lmm/criterion-factor.ts): a factor is
 * never changed after it is made, so a solution keeps giving its own θ's answers while the
 * search evaluates elsewhere, and the gradient pieces kept for the last factor are those of the
 * θ asked for. Checked against fresh objectives (no earlier evaluations) on a committed
 * unbalanced period design of the lmerTest fixtures (test/fixtures/r/lmm.R); consistency only,
 * the values themselves are checked against lmerTest in lme4-reference.test.ts.
 */
import { describe, expect, it } from 'vitest';
import { makeRemlObjective } from '../../../analysis/lmm/criterion.js';
import { fitPeriodModel } from '../../../analysis/lmm/fit-period-model.js';
import { loadCases, observationsFromData } from './lmm-fixtures.js';

const expected = loadCases('lmm-seeded.json').find((c) => c.name === 'period-product-session-small')!;
const frame = fitPeriodModel(observationsFromData(expected.data!)).fit.frame;
const thetaA = Float64Array.from(frame.terms, (_, k) => 0.3 + 0.1 * k);
const thetaB = Float64Array.from(frame.terms, (_, k) => 0.9 - 0.1 * k);

describe('criterion stages', () => {
  it('a solution keeps its own conditional variances and modes after evaluations elsewhere', () => {
    const objective = makeRemlObjective(frame);
    const solution = objective.solve(thetaA);
    const before = frame.terms.map((_, k) => solution.conditionalVariances(k));
    objective.valueAndGradient(thetaB);
    objective.secondOrderPieces(thetaB);
    const fresh = makeRemlObjective(frame).solve(thetaA);
    frame.terms.forEach((_, k) => {
      expect(Array.from(solution.conditionalVariances(k))).toEqual(Array.from(fresh.conditionalVariances(k)));
      expect(Array.from(solution.conditionalVariances(k))).toEqual(Array.from(before[k]));
      expect(Array.from(solution.randomEffects[k])).toEqual(Array.from(fresh.randomEffects[k]));
    });
    expect(solution.deviance).toBe(fresh.deviance);
  });

  it('gradient pieces follow θ, whatever was asked before', () => {
    const objective = makeRemlObjective(frame);
    objective.gradientPieces(thetaA);
    const atB = objective.gradientPieces(thetaB)!;
    const again = objective.gradientPieces(thetaA)!;
    const freshA = makeRemlObjective(frame).gradientPieces(thetaA)!;
    const freshB = makeRemlObjective(frame).gradientPieces(thetaB)!;
    expect(Array.from(again.traceT)).toEqual(Array.from(freshA.traceT));
    expect(Array.from(again.modeSquares)).toEqual(Array.from(freshA.modeSquares));
    expect(Array.from(atB.traceT)).toEqual(Array.from(freshB.traceT));
    expect(again.parts.deviance).toBe(freshA.parts.deviance);
    // The second-order pieces at θ reuse the kept gradient pieces of the same θ.
    const second = objective.secondOrderPieces(thetaA)!;
    expect(Array.from(second.traceT)).toEqual(Array.from(freshA.traceT));
    const gradient = objective.valueAndGradient(thetaB).gradient;
    expect(Array.from(gradient)).toEqual(Array.from(makeRemlObjective(frame).valueAndGradient(thetaB).gradient));
  });
});
