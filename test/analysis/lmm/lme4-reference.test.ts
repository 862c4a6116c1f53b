/**
 * The mixed-model engine against lme4 1.1-31 + lmerTest 3.1-3 (R 4.2.2), fixtures written by
 * test/fixtures/r/lmm.R (tight bobyqa). Seeded designs carry their data in the fixture; the data
 * of the lmerTest data sets (TVbo, ham, carrots; GPL >= 2) are in test/fixtures/json/gpl/, the
 * separate folder of GPL test data the R script writes.
 * Two separate checks per case: our criterion at lme4's θ (the objective alone), then the
 * whole fit (objective + optimiser + inference).
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { FitJson } from '../../../domain/analysis.js';
import type { Observation } from '../../../domain/ratings.js';
import { boundaryLrtPValue } from '../../../analysis/distributions/index.js';
import { boundaryLikelihoodRatioTest } from '../../../analysis/lmm/boundary-lrt.js';
import { makeRemlObjective } from '../../../analysis/lmm/criterion.js';
import { fitPeriodModel } from '../../../analysis/lmm/fit-period-model.js';
import { fitSessionModel } from '../../../analysis/lmm/fit-session-model.js';
import { LmmFitError } from '../../../analysis/lmm/errors.js';
import { fitVarianceComponents } from '../../../analysis/lmm/fit.js';
import { buildModelFrame } from '../../../analysis/lmm/model-frame.js';
import { CELL_SUMS_OPTIMIZER_NAME } from '../../../analysis/lmm/session-cells-fit.js';
import { productContrastRows } from '../../../analysis/lmm/satterthwaite.js';
import * as tol from '../../helpers/tolerances.js';
import { FIXTURE_DIR, loadCases, observationsFromData, readGplCsv, type ExpectedFit } from './lmm-fixtures.js';

function expectRelative(actual: number | null, expected: number, tolerance: number, label: string): void {
  expect(actual, label).not.toBeNull();
  const error = Math.abs((actual as number) - expected) / Math.abs(expected);
  expect(error, `${label}: ours ${actual}, lme4 ${expected}`).toBeLessThanOrEqual(tolerance);
}

function expectAbsolute(actual: number, expected: number, tolerance: number, label: string): void {
  expect(Math.abs(actual - expected), `${label}: ours ${actual}, lme4 ${expected}`).toBeLessThanOrEqual(tolerance);
}

function criterionAtLme4Theta(observations: Observation[], expected: ExpectedFit): number {
  const frame = buildModelFrame({
    response: observations.map((row) => row.value),
    columns: {
      assessor: observations.map((row) => row.assessor),
      product: observations.map((row) => row.product),
      session: observations.map((row) => row.session),
    },
    fixedFactor: 'product',
    randomTerms: expected.terms.map((term) => term.split(':')),
  });
  return makeRemlObjective(frame, { reml: expected.reml }).evaluate(expected.terms.map((term) => expected.theta[term]));
}

function expectFitMatches(json: FitJson, expected: ExpectedFit): void {
  expect(json.n).toBe(expected.n);
  expect(json.remlCriterion - expected.criterion, 'criterion (ours may be lower)').toBeLessThanOrEqual(tol.CRITERION_OPTIMUM_ABSOLUTE);
  const variances = json.variance as unknown as Record<string, number>;
  const total = Object.values(expected.variances).reduce((sum, value) => sum + value, 0);
  for (const term of [...expected.terms, 'residual']) {
    const want = expected.variances[term];
    if (want < 1e-8) expect(variances[term], `${term} on the boundary`).toBeLessThanOrEqual(tol.BOUNDARY_VARIANCE_FRACTION * total);
    else expectRelative(variances[term], want, tol.VARIANCE_RELATIVE, `variance ${term}`);
  }
  const test = expected.productTest!;
  expect(json.productTest.numDf).toBe(test.numDf);
  expectRelative(json.productTest.F, test.F, tol.F_RELATIVE, 'F');
  expectRelative(json.productTest.denDf, test.denDf, tol.DENOMINATOR_DF_RELATIVE, 'denDf');
  expectRelative(json.productTest.p, test.p, tol.P_VALUE_RELATIVE, 'p');
  expect(json.productMeans.map((mean) => mean.product)).toEqual(expected.productMeans.map((mean) => mean.product));
  expected.productMeans.forEach((mean, index) => {
    expectAbsolute(json.productMeans[index].mean, mean.mean, tol.BLUP_AND_SE_ABSOLUTE, `mean ${mean.product}`);
    expectAbsolute(json.productMeans[index].se, mean.se, tol.BLUP_AND_SE_ABSOLUTE, `se ${mean.product}`);
  });
  const ours = new Map(json.assessorEffects.map((effect) => [effect.assessor, effect]));
  expect(ours.size).toBe(expected.assessorEffects.length);
  for (const effect of expected.assessorEffects) {
    const mine = ours.get(effect.assessor)!;
    expectAbsolute(mine.blup, effect.blup, tol.BLUP_AND_SE_ABSOLUTE, `blup ${effect.assessor}`);
    expectAbsolute(mine.condSD, effect.condSD, tol.BLUP_AND_SE_ABSOLUTE, `condSD ${effect.assessor}`);
  }
}

/** Every assessor × product cell holds the same number of ratings. */
function isBalanced(observations: Observation[]): boolean {
  const counts = new Map<string, number>();
  for (const row of observations) counts.set(`${row.assessor}\u0000${row.product}`, (counts.get(`${row.assessor}\u0000${row.product}`) ?? 0) + 1);
  const assessors = new Set(observations.map((row) => row.assessor)).size;
  const products = new Set(observations.map((row) => row.product)).size;
  return counts.size === assessors * products && new Set(counts.values()).size === 1;
}

function runCase(expected: ExpectedFit, observations: Observation[]): void {
  if (expected.productContrast) {
    it("product contrast rows equal lmerTest's type-III contrasts", () => {
      const frame = buildModelFrame({
        response: observations.map((row) => row.value),
        columns: { assessor: observations.map((row) => row.assessor), product: observations.map((row) => row.product) },
        fixedFactor: 'product',
        randomTerms: [['assessor']],
      });
      const rows = productContrastRows(frame.xTx, frame.nFixed);
      expect(rows).toHaveLength(expected.productContrast!.length);
      rows.forEach((row, r) => row.forEach((value, c) => expect(Math.abs(value - expected.productContrast![r][c])).toBeLessThanOrEqual(1e-12)));
    });
  }
  it('criterion at lme4 θ equals its REMLcrit/deviance', () => {
    const ours = criterionAtLme4Theta(observations, expected);
    expect(Math.abs(ours - expected.criterion) / expected.criterion).toBeLessThanOrEqual(tol.CRITERION_AT_FIXED_THETA_RELATIVE);
  });
  if (!expected.reml) {
    it('ML fit: deviance and variances', () => {
      const fit = fitVarianceComponents(
        {
          response: observations.map((row) => row.value),
          columns: { assessor: observations.map((row) => row.assessor), product: observations.map((row) => row.product) },
          fixedFactor: 'product',
          randomTerms: expected.terms.map((term) => term.split(':')),
        },
        { reml: false },
      );
      expect(fit.criterion - expected.criterion).toBeLessThanOrEqual(tol.CRITERION_OPTIMUM_ABSOLUTE);
      for (const term of expected.terms) expectRelative(fit.variances[term], expected.variances[term], tol.VARIANCE_RELATIVE, term);
      expectRelative(fit.residualVariance, expected.variances.residual, tol.VARIANCE_RELATIVE, 'residual');
    });
    return;
  }
  it('fit: variances, criterion, F-test, product means, assessor BLUPs', () => {
    if (expected.model === 'session') {
      const result = fitSessionModel(observations, { withDiagnostics: true });
      expect(result.withInteraction).toBe(expected.terms.includes('assessor:product'));
      expect(result.diagnostics!.converged).toBe(true);
      expect(result.diagnostics!.singular).toBe(expected.singular);
      // Unbalanced sessions are fitted from their cell summaries (session-cells-fit.ts): this
      // comparison with lme4 is that path's check.
      if (!isBalanced(observations)) expect(result.diagnostics!.optimizer).toBe(CELL_SUMS_OPTIMIZER_NAME);
      expectFitMatches(result.json, expected);
      if (expected.lrt) {
        const lrt = boundaryLikelihoodRatioTest(makeRemlObjective(result.fit.frame), { theta: result.fit.theta, criterion: result.fit.criterion }, expected.lrt.term);
        expectAbsolute(lrt.likelihoodRatio, expected.lrt.likelihoodRatio, tol.LIKELIHOOD_RATIO_ABSOLUTE, `LR ${expected.lrt.term}`);
        expect(lrt.pValue).toBe(boundaryLrtPValue(lrt.likelihoodRatio));
      }
    } else {
      const withProductSession = expected.terms.includes('product:session');
      const result = fitPeriodModel(observations, { withProductSession });
      expect(result.diagnostics.converged).toBe(true);
      expectFitMatches(result.json, expected);
      if (expected.lrt) {
        expectAbsolute(result.productSessionLrt!.likelihoodRatio, expected.lrt.likelihoodRatio, tol.LIKELIHOOD_RATIO_ABSOLUTE, 'LR');
      } else {
        expect(result.productSessionLrt).toBeNull();
      }
    }
  });
}

describe('seeded panel designs (data committed in lmm-seeded.json)', () => {
  for (const expected of loadCases('lmm-seeded.json')) {
    describe(`${expected.name}: ${expected.description}`, () => runCase(expected, observationsFromData(expected.data!)));
  }
});

describe('exact ties of two mean squares, integer ratings (data committed in lmm-ties.json)', () => {
  for (const expected of loadCases('lmm-ties.json')) {
    describe(`${expected.name}: ${expected.description}`, () => {
      const observations = observationsFromData(expected.data!);
      runCase(expected, observations);
      it('the tied component is exactly 0 (not a rounding residue) and the test uses the pooled line', () => {
        const json = fitSessionModel(observations).json;
        const variances = json.variance as unknown as Record<string, number>;
        for (const term of expected.terms) if (expected.variances[term] === 0) expect(variances[term], term).toBe(0);
        expect(json.productTest.denDf).toBeCloseTo(expected.productTest!.denDf, 6);
      });
    });
  }
});

describe('zero residual: both replicates of every cell equal (lmm-zero-residual.json)', () => {
  const [reference] = JSON.parse(readFileSync(join(FIXTURE_DIR, 'lmm-zero-residual.json'), 'utf8')).cases as {
    data: NonNullable<ExpectedFit['data']>;
    lmer: { error: string | null; warned: boolean; residualSdBelow1e6: boolean | null };
  }[];
  const observations = observationsFromData(reference.data);
  it('lmer gives no usable fit there (the reference behaviour: an error, or warnings and a residual SD near 0)', () => {
    expect(reference.lmer.error !== null || (reference.lmer.warned && reference.lmer.residualSdBelow1e6 === true)).toBe(true);
  });
  it('the session model is not fitted, with a sentence saying why', () => {
    expect(() => fitSessionModel(observations)).toThrow(LmmFitError);
    expect(() => fitSessionModel(observations)).toThrow('no replicate variation: every assessor gave identical ratings to each product');
  });
  it('nor is a period model over sessions that repeat the same ratings (the model reproduces every rating)', () => {
    const sessions = ['S1', 'S2', 'S3'].flatMap((session, s) => observations.map((row) => ({ ...row, session, value: row.value + s })));
    let error: unknown = null;
    try {
      fitPeriodModel(sessions);
    } catch (caught) {
      error = caught;
    }
    expect(error).toBeInstanceOf(LmmFitError);
    expect((error as LmmFitError).code).toBe('no-residual-variation');
  });
});

describe('nlme ergoStool (published example, data in lmm-ergostool.json)', () => {
  for (const expected of loadCases('lmm-ergostool.json')) runCase(expected, observationsFromData(expected.data!, 'effort'));
});

describe('lmerTest TVbo: 15 attributes, an unbalanced subset and two period fits', () => {
  const rows = readGplCsv('tvbo.csv');
  for (const expected of loadCases('lmm-tvbo.json')) {
    describe(expected.name, () => {
      const dropped = new Set((expected.rowsDropped ?? []).map((row) => row - 1));
      const observations: Observation[] = rows
        .filter((_, index) => !dropped.has(index))
        .map((row) => ({
          session: expected.model === 'period' ? row.tvset : 'S1',
          assessor: row.assessor,
          product: expected.model === 'period' ? row.picture : row.product,
          replicate: Number(row.replicate),
          attribute: expected.attribute!,
          value: Number(row[expected.attribute!]),
        }));
      runCase(expected, observations);
    });
  }
});

describe('lmerTest ham and carrots (consumer data, large sessions)', () => {
  for (const expected of loadCases('lmm-consumer.json')) {
    const rows = readGplCsv(expected.cache!);
    describe(expected.name, () => {
      const observations: Observation[] = rows.map((row) => ({
        session: 'S1',
        assessor: row.assessor,
        product: row.product,
        replicate: Number(row.replicate),
        attribute: 'liking',
        value: Number(row.value),
      }));
      runCase(expected, observations);
    });
  }
});
