/**
 * Speed devices of the period fit must not change its answers: warm starts (from a neighbouring
 * window's fit, or a poor guess), the average-information Hessian that steers the optimiser,
 * and the multi-column block-arrow solves. References: the cold fit (itself checked against
 * lme4/lmerTest in lme4-reference.test.ts), differences of the analytic gradient, and the
 * one-column solves.
 */
import { describe, expect, it } from 'vitest';
import { generatePanel } from '../../../demo/generate-panel.js';
import type { Observation } from '../../../domain/ratings.js';
import {
  blockArrowBackSolve,
  blockArrowBackSolveRows,
  blockArrowForwardSolve,
  blockArrowForwardSolveRows,
  factorBlockArrowInPlace,
  makeBlockArrowLayout,
  makeBlockArrowWorkspace,
} from '../../../analysis/linalg/block-arrow.js';
import { makeRemlObjective } from '../../../analysis/lmm/criterion.js';
import { fitPeriodModel, relativeSdsFromVariances, type PeriodModelFit } from '../../../analysis/lmm/fit-period-model.js';
import { buildModelFrame } from '../../../analysis/lmm/model-frame.js';
import { minimizeBounded } from '../../../analysis/lmm/optimise.js';
import { readFixture, toObservations, type ColumnData } from '../indices/fixture-helpers.js';
import { CRITERION_OPTIMUM_ABSOLUTE, DENOMINATOR_DF_RELATIVE, F_RELATIVE, LIKELIHOOD_RATIO_ABSOLUTE, VARIANCE_RELATIVE } from '../../helpers/tolerances.js';

// Invented demo panel (seeded), unbalanced: assessors miss about 5 % of sessions.
const panel = generatePanel({ seed: 7, nWeeks: 14, nAssessors: 10, startDate: '2026-01-05', faults: 'none', nAttributes: 3, absenceRate: 0.05 });
const labels = panel.sessions.map((s) => s.label);
const attributes = [...new Set(panel.ratings.map((r) => r.attribute))].sort();
function windowRatings(attribute: string, first: number, last: number): Observation[] {
  const window = new Set(labels.slice(first, last));
  return panel.ratings.filter((r) => r.attribute === attribute && window.has(r.session));
}

function expectSameFit(actual: PeriodModelFit, expected: PeriodModelFit): void {
  expect(actual.diagnostics.converged).toBe(true);
  expect(Math.abs(actual.json.remlCriterion - expected.json.remlCriterion)).toBeLessThan(CRITERION_OPTIMUM_ABSOLUTE);
  const total = Object.values(expected.json.variance).reduce<number>((sum, value) => sum + (value ?? 0), 0);
  for (const [term, value] of Object.entries(expected.json.variance)) {
    const ours = actual.json.variance[term as keyof typeof actual.json.variance] as number;
    expect(Math.abs(ours - (value as number))).toBeLessThanOrEqual(VARIANCE_RELATIVE * Math.max(Math.abs(value as number), 1e-3 * total));
  }
  expect(Math.abs(actual.json.productTest.F! / expected.json.productTest.F! - 1)).toBeLessThan(F_RELATIVE);
  expect(Math.abs(actual.json.productTest.denDf! / expected.json.productTest.denDf! - 1)).toBeLessThan(DENOMINATOR_DF_RELATIVE);
  expect(Math.abs(actual.productSessionLrt!.likelihoodRatio - expected.productSessionLrt!.likelihoodRatio)).toBeLessThan(LIKELIHOOD_RATIO_ABSOLUTE);
}

describe('period fit warm starts', () => {
  it('the design goes through the general optimiser (not the balanced closed form)', () => {
    const fit = fitPeriodModel(windowRatings(attributes[0], 2, 14));
    expect(fit.diagnostics.optimizer).not.toMatch(/balanced/);
  });

  it.each(attributes)('%s: started from the previous window\'s fit, the latest window gives the cold answer in fewer evaluations', (attribute) => {
    const previous = fitPeriodModel(windowRatings(attribute, 1, 13));
    const ratings = windowRatings(attribute, 2, 14);
    const cold = fitPeriodModel(ratings);
    const warm = fitPeriodModel(ratings, {
      startRelativeSds: relativeSdsFromVariances(previous.json.variance)!,
      startReducedRelativeSds: previous.reducedRelativeSds!,
    });
    expectSameFit(warm, cold);
    expect(warm.diagnostics.evaluations).toBeLessThan(cold.diagnostics.evaluations);
  });

  it('a poor warm start (far off, or every component at 0) still gives the cold answer', () => {
    const ratings = windowRatings(attributes[1], 2, 14);
    const cold = fitPeriodModel(ratings);
    const far = { assessor: 40, session: 40, 'assessor:product': 40, 'assessor:session': 40, 'product:session': 40 };
    const zero = { assessor: 0, session: 0, 'assessor:product': 0, 'assessor:session': 0, 'product:session': 0 };
    expectSameFit(fitPeriodModel(ratings, { startRelativeSds: far, startReducedRelativeSds: far }), cold);
    expectSameFit(fitPeriodModel(ratings, { startRelativeSds: zero, startReducedRelativeSds: zero }), cold);
  });

  it('a warm start missing a term is ignored', () => {
    const ratings = windowRatings(attributes[2], 2, 14);
    const cold = fitPeriodModel(ratings);
    expectSameFit(fitPeriodModel(ratings, { startRelativeSds: { assessor: 1 } }), cold);
  });

  it('relativeSdsFromVariances gives θ = √(σ²_term/σ²)', () => {
    expect(relativeSdsFromVariances({ assessor: 0.5, 'assessor:product': null, residual: 2, session: 0, 'product:session': 8 })).toEqual({
      assessor: 0.5,
      session: 0,
      'product:session': 2,
    });
    expect(relativeSdsFromVariances({ assessor: 0.5, 'assessor:product': 0.1, residual: 0 })).toBeNull();
  });
});

describe('average information (the optimiser\'s Hessian)', () => {
  const ratings = windowRatings(attributes[0], 2, 14);
  const fit = fitPeriodModel(ratings);
  const frame = buildModelFrame({
    response: ratings.map((r) => r.value),
    columns: { assessor: ratings.map((r) => r.assessor), product: ratings.map((r) => r.product), session: ratings.map((r) => r.session) },
    fixedFactor: 'product',
    randomTerms: fit.fit.frame.terms.map((term) => term.factors),
  });
  const objective = makeRemlObjective(frame);

  it('is close to the Hessian from differences of the analytic gradient at the REML estimates', () => {
    const k = objective.nTheta;
    const gamma = Array.from(fit.fit.theta, (value) => value * value);
    const gradientAt = (point: number[]) => objective.valueAndGradient(point.map(Math.sqrt)).gradient;
    const differences = new Float64Array(k * k);
    for (let i = 0; i < k; i++) {
      const h = 1e-5 * gamma[i];
      const up = gamma.slice();
      up[i] += h;
      const down = gamma.slice();
      down[i] -= h;
      const [a, b] = [gradientAt(up), gradientAt(down)];
      for (let j = 0; j < k; j++) differences[j * k + i] = (a[j] - b[j]) / (2 * h);
    }
    const information = objective.averageInformation(fit.fit.theta)!;
    // An approximation (the traces replaced by their data versions): a few per cent of the scale.
    for (let i = 0; i < k; i++) {
      for (let j = 0; j < k; j++) {
        const scale = Math.sqrt(differences[i * k + i] * differences[j * k + j]);
        expect(Math.abs(information[i * k + j] - differences[i * k + j])).toBeLessThan(0.05 * scale);
      }
    }
  });
});

describe('average information where a term is not identified', () => {
  it('falls back to Hessians from differences and gives the same fit as without it', () => {
    // Three seeded balanced designs (R fixture indices-designs.json) taken as sessions: session
    // and product:session are not identified and their rows of the average information vanish;
    // inverting it would send them to infinity.
    const designs = readFixture<{ designs: { data: ColumnData }[] }>('indices-designs.json').designs;
    const ratings = [0, 2, 5].flatMap((index) => toObservations(designs[index].data, `S${index + 1}`, 'crispness'));
    const frame = buildModelFrame({
      response: ratings.map((r) => r.value),
      columns: { assessor: ratings.map((r) => r.assessor), product: ratings.map((r) => r.product), session: ratings.map((r) => r.session) },
      fixedFactor: 'product',
      randomTerms: [['assessor'], ['session'], ['assessor', 'product'], ['assessor', 'session'], ['product', 'session']],
    });
    const objective = makeRemlObjective(frame);
    const optimum = (steered: boolean) =>
      minimizeBounded(objective.evaluate, [0.5, 0.5, 0.5, 0.5, 0.5], {}, objective.valueAndGradient, {
        approximateHessian: steered ? objective.averageInformation : undefined,
      });
    const [plain, steered] = [optimum(false), optimum(true)];
    expect(steered.converged).toBe(true);
    expect(Math.abs(steered.value - plain.value)).toBeLessThan(CRITERION_OPTIMUM_ABSOLUTE);
    expect(Array.from(steered.theta)).toEqual(Array.from(plain.theta).map((value) => expect.closeTo(value, 6)));
  });
});

describe('multi-column block-arrow solves', () => {
  it('equal the one-column solves on a random positive-definite block-arrow matrix', () => {
    let seed = 12345;
    const random = () => ((seed = (seed * 1103515245 + 12345) % 2147483648) / 2147483648) - 0.5;
    const layout = makeBlockArrowLayout([4, 6, 3], 5);
    const workspace = makeBlockArrowWorkspace(layout);
    const fill = (matrix: Float64Array, n: number, diagonal: boolean) => {
      for (let i = 0; i < n; i++) for (let j = 0; j <= i; j++) matrix[i * n + j] = matrix[j * n + i] = diagonal && i === j ? 20 : random();
    };
    workspace.blocks.forEach((block, b) => fill(block, layout.blockSizes[b], true));
    workspace.couplings.forEach((coupling) => coupling.forEach((_, i) => (coupling[i] = random())));
    fill(workspace.border, layout.borderSize, true);
    expect(factorBlockArrowInPlace(workspace)).toBe(true);
    const m = 3;
    const x = Float64Array.from({ length: layout.size * m }, random);
    for (const [rows, column] of [
      [blockArrowForwardSolveRows, blockArrowForwardSolve],
      [blockArrowBackSolveRows, blockArrowBackSolve],
    ] as const) {
      const together = x.slice();
      rows(workspace, together, m);
      const oneByOne = x.slice();
      for (let c = 0; c < m; c++) column(workspace, oneByOne, c, m);
      for (let i = 0; i < x.length; i++) expect(together[i]).toBeCloseTo(oneByOne[i], 12);
    }
  });
});
