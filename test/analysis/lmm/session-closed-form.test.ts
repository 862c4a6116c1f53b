/**
 * The balanced session JSON written in closed form (fit-session-model.ts, closedFormJson) against
 * the general machinery at the same data — model frame, factorised REML criterion, optimiser
 * confirmation, conditional modes — which the lme4 fixtures check (lme4-reference.test.ts): every
 * number of the JSON, on random balanced sessions with and without replicates and with variance
 * components on the boundary (the pooled closed forms).
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';
import { fitSessionModel } from '../../../analysis/lmm/fit-session-model.js';
import { seededRandom } from '../../../analysis/reliability/seeded-random.js';

function balancedSession(seed: number, nAssessors: number, nProducts: number, nReplicates: number, sdAssessor: number, sdInteraction: number): Observation[] {
  const uniform = seededRandom(seed);
  const normal = (sd: number): number => sd * Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
  const rows: Observation[] = [];
  const assessorShift = Array.from({ length: nAssessors }, () => normal(sdAssessor));
  for (let a = 0; a < nAssessors; a++) {
    for (let p = 0; p < nProducts; p++) {
      const interaction = normal(sdInteraction);
      for (let r = 1; r <= nReplicates; r++) {
        const value = Math.round((5 + 0.3 * p + assessorShift[a] + interaction + normal(0.8)) * 100) / 100;
        // Product codes that sort differently as text and as numbers, rows in design order.
        rows.push({ session: 'S1', attribute: 'crisp', assessor: `A${a}`, product: String(100 + p * 450), replicate: r, value });
      }
    }
  }
  return rows;
}

const close = (actual: number | null, expected: number | null, tolerance: number): void => {
  if (expected === null) {
    expect(actual).toBeNull();
    return;
  }
  expect(Math.abs((actual as number) - expected)).toBeLessThanOrEqual(tolerance * Math.max(1, Math.abs(expected)));
};

describe('balanced session JSON in closed form', () => {
  it('equals the general fit at the same data (variances, REMLcrit, F test, means and SEs, BLUPs and conditional SDs)', () => {
    let closedForms = 0;
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 1_000_000 }),
        fc.integer({ min: 2, max: 9 }),
        fc.integer({ min: 2, max: 6 }),
        fc.integer({ min: 1, max: 3 }),
        fc.constantFrom(0, 0.2, 0.8),
        fc.constantFrom(0, 0.15, 0.5),
        (seed, nAssessors, nProducts, nReplicates, sdAssessor, sdInteraction) => {
          const result = fitSessionModel(balancedSession(seed, nAssessors, nProducts, nReplicates, sdAssessor, sdInteraction), { withDiagnostics: true });
          const json = result.json;
          const fit = result.fit;
          // Sessions without a closed form (two components on the boundary) take the general path for the JSON too.
          if (!result.diagnostics!.balancedFastPath) return;
          closedForms++;
          close(json.variance.assessor, fit.variances.assessor, 1e-9);
          close(json.variance['assessor:product'], result.withInteraction ? fit.variances['assessor:product'] : null, 1e-9);
          close(json.variance.residual, fit.residualVariance, 1e-9);
          close(json.remlCriterion, fit.criterion, 1e-9);
          close(json.productTest.F, fit.productTest.F, 1e-9);
          close(json.productTest.denDf, fit.productTest.denDf, 1e-9);
          close(json.productTest.p, fit.productTest.pValue, 1e-9);
          expect(json.productTest.numDf).toBe(fit.productTest.numDf);
          expect(json.productMeans.map((mean) => mean.product)).toEqual(fit.productMeans.map((mean) => mean.product));
          json.productMeans.forEach((mean, i) => {
            close(mean.mean, fit.productMeans[i].mean, 1e-9);
            close(mean.se, fit.productMeans[i].se, 1e-9);
          });
          const effects = fit.randomEffects.assessor;
          expect(json.assessorEffects.map((effect) => effect.assessor)).toEqual(effects.map((effect) => effect.level));
          json.assessorEffects.forEach((effect, i) => {
            close(effect.blup, effects[i].blup, 1e-9);
            close(effect.condSD, effects[i].condSD, 1e-9);
          });
          expect(json.n).toBe(fit.frame.nObservations);
        },
      ),
      { numRuns: 200, seed: 11 },
    );
    expect(closedForms).toBeGreaterThan(100);
  });
});
