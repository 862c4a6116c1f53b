/**
 * Balanced sessions with integer ratings, where two mean squares often tie exactly (about one
 * small session in 300): the closed form must give the boundary solution — the tied component
 * exactly 0, never a rounding residue of ~1e-17 — and agree with the general REML fit (model
 * frame, optimiser, numerical Satterthwaite df) at the same data. lmerTest's answers on such
 * ties are pinned in lme4-reference.test.ts (lmm-ties.json).
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';
import { fitSessionModel } from '../../../analysis/lmm/fit-session-model.js';
import { fitVarianceComponents } from '../../../analysis/lmm/fit.js';
import { seededRandom } from '../../../analysis/reliability/seeded-random.js';

/** Integer ratings 1–9: product step, assessor shift and noise each drawn from a few integers. */
function integerSession(seed: number, nAssessors: number, nProducts: number, nReplicates: number, spread: number): Observation[] {
  const uniform = seededRandom(seed);
  const pick = (k: number): number => Math.floor(uniform() * (2 * k + 1)) - k;
  const shift = Array.from({ length: nAssessors }, () => pick(1));
  const rows: Observation[] = [];
  for (let a = 0; a < nAssessors; a++) {
    for (let p = 0; p < nProducts; p++) {
      for (let r = 1; r <= nReplicates; r++) {
        const value = Math.min(9, Math.max(1, 4 + Math.floor(p / 2) + shift[a] + pick(spread)));
        rows.push({ session: 'S1', attribute: 'firm', assessor: `A${a}`, product: `P${p}`, replicate: r, value });
      }
    }
  }
  return rows;
}

/** Sum of squares about the mean divided by n − 1: the scale of the variances. */
function totalVariance(rows: Observation[]): number {
  const mean = rows.reduce((sum, row) => sum + row.value, 0) / rows.length;
  return rows.reduce((sum, row) => sum + (row.value - mean) ** 2, 0) / (rows.length - 1);
}

function generalFit(rows: Observation[], withInteraction: boolean) {
  return fitVarianceComponents({
    response: rows.map((row) => row.value),
    columns: { assessor: rows.map((row) => row.assessor), product: rows.map((row) => row.product) },
    fixedFactor: 'product',
    randomTerms: withInteraction ? [['assessor'], ['assessor', 'product']] : [['assessor']],
  });
}

describe('mean-square ties in balanced integer sessions', () => {
  it('variances are 0 or clearly positive, and the closed form agrees with the general REML fit', () => {
    let ties = 0;
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 1_000_000 }),
        fc.integer({ min: 2, max: 6 }),
        fc.integer({ min: 2, max: 4 }),
        fc.integer({ min: 1, max: 3 }),
        fc.integer({ min: 1, max: 2 }),
        (seed, nAssessors, nProducts, nReplicates, spread) => {
          const rows = integerSession(seed, nAssessors, nProducts, nReplicates, spread);
          if (new Set(rows.map((row) => row.value)).size < 2) return;
          let result;
          try {
            result = fitSessionModel(rows, { withDiagnostics: true });
          } catch {
            return; // no replicate variation: covered by the zero-residual tests
          }
          const scale = totalVariance(rows);
          const variances = Object.values(result.json.variance).filter((value): value is number => typeof value === 'number');
          for (const value of variances) expect(value === 0 || value > 1e-12 * scale, `variance ${value}`).toBe(true);
          if (!result.diagnostics?.balancedFastPath) return;
          const zeros = variances.filter((value) => value === 0).length;
          if (zeros === 0) return;
          ties++;
          const general = generalFit(rows, result.withInteraction);
          const json = result.json;
          const near = (ours: number, theirs: number, tolerance: number, label: string): void =>
            expect(Math.abs(ours - theirs), `${label}: closed form ${ours}, general ${theirs}`).toBeLessThanOrEqual(tolerance * Math.max(1, Math.abs(theirs)));
          near(json.variance.assessor, general.variances.assessor, 1e-6 * scale, 'assessor variance');
          if (result.withInteraction) near(json.variance['assessor:product']!, general.variances['assessor:product'], 1e-6 * scale, 'assessor:product variance');
          near(json.variance.residual, general.residualVariance, 1e-6 * scale, 'residual variance');
          expect(json.remlCriterion - general.criterion, 'criterion').toBeLessThanOrEqual(1e-8);
          near(json.productTest.F!, general.productTest.F!, 1e-5, 'F');
          near(json.productTest.denDf!, general.productTest.denDf!, 1e-3, 'denDf');
          near(json.productTest.p!, general.productTest.pValue!, 1e-4, 'p');
        },
      ),
      { numRuns: 400, seed: 20261204 },
    );
    console.info(`mean-square ties: ${ties} boundary closed forms compared`);
    expect(ties).toBeGreaterThan(10);
  });
});
