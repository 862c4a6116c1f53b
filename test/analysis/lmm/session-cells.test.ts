/**
 * The one-session model fitted from its cell summaries (session-criterion.ts, session-cells-fit.ts),
 * used for unbalanced sessions: its criterion against lme4's REMLcrit at lme4's θ on the committed
 * fixtures (lmm.R), and every number of its JSON against the general machinery (model frame,
 * factorised criterion, exact Satterthwaite pieces) at the same θ on random unbalanced sessions —
 * missing ratings, empty cells, unequal replicates, components on the boundary. The whole fit is
 * compared with lme4/lmerTest in lme4-reference.test.ts.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { fitSessionModel } from '../../../analysis/lmm/fit-session-model.js';
import { CELL_SUMS_OPTIMIZER_NAME } from '../../../analysis/lmm/session-cells-fit.js';
import * as tol from '../../helpers/tolerances.js';
import { loadCases, observationsFromData } from './lmm-fixtures.js';
import { sessionCriterionOf, unbalancedSession } from './unbalanced-session.js';

describe('cell-sum criterion at lme4 θ', () => {
  const cases = loadCases('lmm-seeded.json').filter((expected) => expected.model === 'session' && expected.reml);
  it.each(cases.map((expected) => [expected.name, expected] as const))('%s: equals REMLcrit', (_, expected) => {
    const observations = observationsFromData(expected.data!);
    const criterion = sessionCriterionOf(observations, expected.terms.includes('assessor:product'));
    const theta = expected.terms.map((term) => expected.theta[term]);
    const value = criterion.evaluate(theta);
    expect(Math.abs(value - expected.criterion) / Math.abs(expected.criterion)).toBeLessThanOrEqual(tol.CRITERION_AT_FIXED_THETA_RELATIVE);
  });
});

const near = (actual: number | null, expected: number | null, tolerance: number, label: string): void => {
  if (expected === null) {
    expect(actual, label).toBeNull();
    return;
  }
  expect(Math.abs((actual as number) - expected), `${label}: ${actual} vs ${expected}`).toBeLessThanOrEqual(tolerance * Math.max(1, Math.abs(expected)));
};

describe('unbalanced session JSON from cell summaries', () => {
  it('equals the general fit at the same θ', () => {
    let cellFits = 0;
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 1_000_000 }),
        fc.integer({ min: 2, max: 10 }),
        fc.integer({ min: 2, max: 7 }),
        fc.constantFrom(0.03, 0.1, 0.25),
        fc.constantFrom(0, 0.3, 1),
        fc.constantFrom(0, 0.2, 0.6),
        (seed, nAssessors, nProducts, dropShare, sdAssessor, sdInteraction) => {
          const observations = unbalancedSession(seed, nAssessors, nProducts, dropShare, sdAssessor, sdInteraction);
          let result: ReturnType<typeof fitSessionModel>;
          try {
            result = fitSessionModel(observations);
          } catch {
            return; // too few ratings or products left: the general path refuses the same data
          }
          if (result.diagnostics?.optimizer !== CELL_SUMS_OPTIMIZER_NAME) return;
          cellFits++;
          const { json, fit } = result;
          near(json.variance.assessor, fit.variances.assessor, 1e-8, 'assessor variance');
          near(json.variance['assessor:product'], result.withInteraction ? fit.variances['assessor:product'] : null, 1e-8, 'interaction variance');
          near(json.variance.residual, fit.residualVariance, 1e-8, 'residual variance');
          near(json.remlCriterion, fit.criterion, 1e-9, 'REMLcrit');
          near(json.productTest.F, fit.productTest.F, 1e-8, 'F');
          // Satterthwaite: differences of the analytic gradient here, exact second derivatives there.
          near(json.productTest.denDf, fit.productTest.denDf, 1e-5, 'denDf');
          near(json.productTest.p, fit.productTest.pValue, 1e-5, 'p');
          expect(json.productTest.numDf).toBe(fit.productTest.numDf);
          expect(json.productMeans.map((mean) => mean.product)).toEqual(fit.productMeans.map((mean) => mean.product));
          json.productMeans.forEach((mean, i) => {
            near(mean.mean, fit.productMeans[i].mean, 1e-8, `mean ${mean.product}`);
            near(mean.se, fit.productMeans[i].se, 1e-8, `se ${mean.product}`);
          });
          const effects = fit.randomEffects.assessor;
          expect(json.assessorEffects.map((effect) => effect.assessor)).toEqual(effects.map((effect) => effect.level));
          json.assessorEffects.forEach((effect, i) => {
            near(effect.blup, effects[i].blup, 1e-8, `blup ${effect.assessor}`);
            near(effect.condSD, effects[i].condSD, 1e-8, `condSD ${effect.assessor}`);
          });
          expect(json.n).toBe(fit.frame.nObservations);
          expect(json.products).toBe(fit.frame.nFixed);
        },
      ),
      { numRuns: 300, seed: 23 },
    );
    expect(cellFits).toBeGreaterThan(200);
  });
});
