/**
 * Stage-level checks of the mixed-model engine that do not need R: the block-arrow Cholesky
 * against a dense factorisation of the same matrix, the balanced fast path against the general
 * optimiser, lmerTest's df-combination rules, and the handling of awkward data.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';
import {
  blockArrowBackSolve,
  blockArrowForwardSolve,
  blockArrowInverseDiagonalAll,
  blockArrowLogDeterminant,
  factorBlockArrowInPlace,
  makeBlockArrowLayout,
  makeBlockArrowWorkspace,
} from '../../../analysis/linalg/block-arrow.js';
import { choleskyInPlace, choleskyLogDeterminant, inverseFromCholesky } from '../../../analysis/linalg/dense.js';
import { makeRemlObjective } from '../../../analysis/lmm/criterion.js';
import { LmmFitError } from '../../../analysis/lmm/errors.js';
import { fitPeriodModel } from '../../../analysis/lmm/fit-period-model.js';
import { fitSessionModel } from '../../../analysis/lmm/fit-session-model.js';
import { fitFromObjective } from '../../../analysis/lmm/fit.js';
import { buildModelFrame } from '../../../analysis/lmm/model-frame.js';
import { combineSatterthwaiteDf } from '../../../analysis/lmm/satterthwaite.js';
import { boundaryLrtPValue } from '../../../analysis/distributions/index.js';
import { seededRandom } from '../../../analysis/reliability/seeded-random.js';

/** Seeded normal deviates (Box–Muller on the project's seeded uniform) for invented test data. */
function normalGenerator(seed: number): (sd?: number) => number {
  const uniform = seededRandom(seed);
  return (sd = 1) => sd * Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
}

function simulateSession(seed: number, nAssessors: number, nProducts: number, nReplicates: number, sds: [number, number, number]): Observation[] {
  const normal = normalGenerator(seed);
  const assessorShift = Array.from({ length: nAssessors }, () => normal(sds[0]));
  const rows: Observation[] = [];
  for (let a = 0; a < nAssessors; a++) {
    for (let p = 0; p < nProducts; p++) {
      const interaction = normal(sds[1]);
      for (let r = 0; r < nReplicates; r++) {
        rows.push({ session: 'S1', attribute: 'sweet', assessor: `A${a + 10}`, product: `P${p}`, replicate: r + 1, value: 5 + 0.4 * p + assessorShift[a] + interaction + normal(sds[2]) });
      }
    }
  }
  return rows;
}

describe('block-arrow Cholesky', () => {
  it('gives the log-determinant, solves and inverse diagonal of a dense factorisation of the same matrix', () => {
    const normal = normalGenerator(7);
    const layout = makeBlockArrowLayout([3, 1, 4], 3);
    const q = layout.size;
    // Random SPD matrix with the block-arrow zero pattern: B Bᵀ + q I restricted to the pattern is
    // not SPD in general, so build it as Gᵀ G with G having the pattern of the factor.
    const dense = new Float64Array(q * q);
    const factor = new Float64Array(q * q);
    const blockOf = (i: number): number => layout.blockOffsets.findIndex((offset, b) => i >= offset && i < offset + layout.blockSizes[b]);
    for (let i = 0; i < q; i++) {
      for (let j = 0; j <= i; j++) {
        const bi = blockOf(i);
        const bj = blockOf(j);
        const allowed = i >= layout.borderOffset || bi === bj;
        if (allowed) factor[i * q + j] = i === j ? 1 + Math.abs(normal()) : normal(0.5);
      }
    }
    for (let i = 0; i < q; i++) for (let j = 0; j < q; j++) for (let k = 0; k < q; k++) dense[i * q + j] += factor[i * q + k] * factor[j * q + k];
    const workspace = makeBlockArrowWorkspace(layout);
    layout.blockSizes.forEach((size, b) => {
      const offset = layout.blockOffsets[b];
      for (let i = 0; i < size; i++) {
        for (let j = 0; j < size; j++) workspace.blocks[b][i * size + j] = dense[(offset + i) * q + offset + j];
        for (let j = 0; j < layout.borderSize; j++) workspace.couplings[b][i * layout.borderSize + j] = dense[(offset + i) * q + layout.borderOffset + j];
      }
    });
    for (let i = 0; i < layout.borderSize; i++) {
      for (let j = 0; j < layout.borderSize; j++) workspace.border[i * layout.borderSize + j] = dense[(layout.borderOffset + i) * q + layout.borderOffset + j];
    }
    expect(factorBlockArrowInPlace(workspace)).toBe(true);
    const denseFactor = dense.slice();
    expect(choleskyInPlace(denseFactor, q)).toBe(true);
    expect(blockArrowLogDeterminant(workspace)).toBeCloseTo(choleskyLogDeterminant(denseFactor, q), 10);
    const rhs = Float64Array.from({ length: q }, () => normal());
    const x = rhs.slice();
    blockArrowForwardSolve(workspace, x);
    blockArrowBackSolve(workspace, x);
    const inverse = inverseFromCholesky(denseFactor, q);
    for (let i = 0; i < q; i++) {
      let expected = 0;
      for (let j = 0; j < q; j++) expected += inverse[i * q + j] * rhs[j];
      expect(x[i]).toBeCloseTo(expected, 10);
    }
    const diagonal = new Float64Array(q);
    blockArrowInverseDiagonalAll(workspace, diagonal);
    for (let i = 0; i < q; i++) expect(diagonal[i]).toBeCloseTo(inverse[i * q + i], 10);
  });
});

describe('balanced fast path', () => {
  it('equals the general optimiser and its numerical Satterthwaite test (random balanced sessions)', () => {
    let fastPathCases = 0;
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 1_000_000 }), fc.integer({ min: 3, max: 8 }), fc.integer({ min: 2, max: 5 }), fc.integer({ min: 1, max: 3 }), (seed, nAssessors, nProducts, nReplicates) => {
        const rows = simulateSession(seed, nAssessors, nProducts, nReplicates, [0.6, 0.4, 0.8]);
        const fast = fitSessionModel(rows, { withDiagnostics: true });
        const general = fitFromObjective(makeRemlObjective(fast.fit.frame), { randomEffectTerms: ['assessor'] });
        if (!fast.diagnostics!.balancedFastPath) return;
        fastPathCases++;
        expect(general.criterion).toBeGreaterThanOrEqual(fast.json.remlCriterion - 1e-8);
        expect(Math.abs(general.criterion - fast.json.remlCriterion)).toBeLessThan(1e-7);
        expect(fast.json.productTest.F! / general.productTest.F!).toBeCloseTo(1, 5);
        expect(fast.json.productTest.denDf! / general.productTest.denDf!).toBeCloseTo(1, 4);
        expect(fast.json.variance.residual / general.residualVariance).toBeCloseTo(1, 5);
      }),
      { numRuns: 25, seed: 42 },
    );
    expect(fastPathCases).toBeGreaterThan(10);
  });
});

describe('balanced period fast path', () => {
  it('equals the general optimiser and its numerical Satterthwaite test', () => {
    const normal = normalGenerator(99);
    const rows: Observation[] = [];
    const assessorShift = Array.from({ length: 6 }, () => normal(0.6));
    const interaction = Array.from({ length: 24 }, () => normal(0.4));
    for (let s = 0; s < 5; s++) {
      const sessionShift = normal(0.5);
      const productSession = Array.from({ length: 4 }, () => normal(0.4));
      const assessorSession = Array.from({ length: 6 }, () => normal(0.4));
      for (let a = 0; a < 6; a++) {
        for (let p = 0; p < 4; p++) {
          for (let r = 0; r < 2; r++) {
            const value = 5 + 0.5 * p + assessorShift[a] + interaction[a * 4 + p] + sessionShift + productSession[p] + assessorSession[a] + normal(0.7);
            rows.push({ session: `S${s}`, attribute: 'sweet', assessor: `A${a}`, product: `P${p}`, replicate: r + 1, value });
          }
        }
      }
    }
    const fast = fitPeriodModel(rows);
    expect(fast.diagnostics.optimizer).toMatch(/^balanced-anova/);
    const general = fitFromObjective(makeRemlObjective(fast.fit.frame), { randomEffectTerms: ['assessor'] });
    expect(Math.abs(general.criterion - fast.json.remlCriterion)).toBeLessThan(1e-7);
    expect(fast.json.productTest.F! / general.productTest.F!).toBeCloseTo(1, 5);
    expect(fast.json.productTest.denDf! / general.productTest.denDf!).toBeCloseTo(1, 4);
  });
});

describe("lmerTest's combination of per-contrast df (get_Fstat_ddf, lmerTest 3.1-3 source)", () => {
  it('one contrast: its df; equal df: their mean; any df ≤ 2: 2; otherwise 2E/(E − q)', () => {
    expect(combineSatterthwaiteDf([12.5])).toBe(12.5);
    expect(combineSatterthwaiteDf([20, 20, 20])).toBe(20);
    expect(combineSatterthwaiteDf([1.5, 30])).toBe(2);
    // E = 10/8 + 20/18 = 2.3611…, ddf = 2E/(E − 2) = 13.0769…
    expect(combineSatterthwaiteDf([10, 20])).toBeCloseTo((2 * (10 / 8 + 20 / 18)) / (10 / 8 + 20 / 18 - 2), 12);
  });
});

describe('awkward data', () => {
  const base = simulateSession(11, 6, 4, 2, [0.5, 0.3, 0.7]);

  it('constant ratings: a clear error, not NaN', () => {
    const rows = base.map((row) => ({ ...row, value: 5 }));
    expect(() => fitSessionModel(rows)).toThrow(LmmFitError);
    expect(() => fitSessionModel(rows)).toThrow(/identical/);
  });

  it('one assessor, mixed sessions or attributes, no rows: clear errors', () => {
    expect(() => fitSessionModel(base.filter((row) => row.assessor === 'A10'))).toThrow(/at least 2/);
    expect(() => fitSessionModel([...base, { ...base[0], session: 'S2' }])).toThrow(/one session/);
    expect(() => fitSessionModel([...base, { ...base[0], attribute: 'bitter' }])).toThrow(/one attribute/);
    expect(() => fitSessionModel([])).toThrow(/no ratings/);
  });

  it('one product: no product test, still variances and BLUPs', () => {
    const result = fitSessionModel(base.filter((row) => row.product === 'P0'));
    expect(result.json.productTest).toEqual({ F: null, numDf: 0, denDf: null, p: null });
    expect(result.json.variance.residual).toBeGreaterThan(0);
    expect(result.json.assessorEffects).toHaveLength(6);
    // The interaction would duplicate the assessor term: it is left out.
    expect(result.withInteraction).toBe(false);
    expect(result.json.variance['assessor:product']).toBeNull();
  });

  it('runs the general machinery for a closed-form session only when diagnostics are asked for', () => {
    const rows = simulateSession(20261204, 6, 4, 2, [0.6, 0.4, 0.8]);
    const quick = fitSessionModel(rows);
    const full = fitSessionModel(rows, { withDiagnostics: true });
    expect(full.diagnostics!.balancedFastPath).toBe(true);
    expect(quick.diagnostics).toBeNull();
    expect(quick.json).toEqual(full.json);
  });

  it('two assessors: fitted with a note that the assessor variance is poorly determined', () => {
    const result = fitSessionModel(base.filter((row) => row.assessor === 'A10' || row.assessor === 'A11'), { withDiagnostics: true });
    expect(result.diagnostics!.messages.join(' ')).toMatch(/too few assessors/);
    expect(Number.isFinite(result.json.remlCriterion)).toBe(true);
  });

  it('ids stay strings and products are ordered as R orders them in the C locale', () => {
    const rows = base.map((row) => ({ ...row, product: ({ P0: '214', P1: '087', P2: '1000', P3: '530' } as Record<string, string>)[row.product] }));
    expect(fitSessionModel(rows).json.productMeans.map((mean) => mean.product)).toEqual(['087', '1000', '214', '530']);
  });

  it('period model: needs two sessions; its LRT p-value is the 50:50 mixture of its likelihood ratio', () => {
    expect(() => fitPeriodModel(base)).toThrow(/at least 2/);
    const twoSessions = [...base, ...simulateSession(12, 6, 4, 2, [0.5, 0.3, 0.7]).map((row) => ({ ...row, session: 'S2' }))];
    const result = fitPeriodModel(twoSessions);
    expect(result.json.session).toBeNull();
    expect(result.json.model).toBe('period');
    expect(Object.keys(result.json.variance).sort()).toEqual(['assessor', 'assessor:product', 'assessor:session', 'product:session', 'residual', 'session']);
    expect(result.productSessionLrt!.pValue).toBe(boundaryLrtPValue(result.productSessionLrt!.likelihoodRatio));
    expect(fitPeriodModel(twoSessions, { withProductSession: false }).productSessionLrt).toBeNull();
  });

  it('the model frame picks the factor that splits the work into blocks', () => {
    const frame = buildModelFrame({
      response: base.map((row) => row.value),
      columns: { assessor: base.map((row) => row.assessor), product: base.map((row) => row.product) },
      fixedFactor: 'product',
      randomTerms: [['assessor'], ['assessor', 'product']],
    });
    expect(frame.blockingFactor).toBe('assessor');
    expect(frame.layout.borderSize).toBe(0);
    expect(frame.layout.blockSizes).toEqual([5, 5, 5, 5, 5, 5]);
  });
});
