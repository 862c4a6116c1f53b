/**
 * The exact Satterthwaite pieces (criterion.secondOrderPieces, varparCovariance's default) against
 * (1) lmerTest 3.1-3's denominator df and p-values in the committed fixtures (test/fixtures/r/lmm.R:
 * balanced, unbalanced, boundary and period designs; TVbo from the GPL data folder), recomputed at
 * our fitted θ with each method; (2) Richardson-extrapolated central differences of the analytic
 * gradient and of cov(β̂) (outside the code under test), for REML and ML and for both ways the
 * trace products are summed (θ ≥ 10⁻² and a component below 10⁻²).
 */
import { describe, expect, it } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';
import { makeRemlObjective, type RemlObjective } from '../../../analysis/lmm/criterion.js';
import { fitPeriodModel } from '../../../analysis/lmm/fit-period-model.js';
import { fitSessionModel } from '../../../analysis/lmm/fit-session-model.js';
import { buildModelFrame } from '../../../analysis/lmm/model-frame.js';
import { productContrastRows, productFTest, varparCovariance } from '../../../analysis/lmm/satterthwaite.js';
import * as tol from '../../helpers/tolerances.js';
import { loadCases, observationsFromData, readGplCsv, type ExpectedFit } from './lmm-fixtures.js';

/** Exact vs previous (differences) method at the same θ, relative: observed ≤ 2e-8 on these cases. */
const METHODS_AGREE_RELATIVE = 1e-6;

function productTests(objective: RemlObjective, theta: Float64Array) {
  const solution = objective.solve(theta);
  const covBeta = Float64Array.from(solution.unscaledCovBeta, (value) => value * solution.sigma * solution.sigma);
  const rows = productContrastRows(objective.frame.xTx, objective.frame.nFixed);
  const exact = varparCovariance(objective, theta, solution.sigma);
  const differences = varparCovariance(objective, theta, solution.sigma, { method: 'differences' });
  return {
    exactMethod: exact.method,
    exact: productFTest(solution.beta, covBeta, rows, exact),
    differences: productFTest(solution.beta, covBeta, rows, differences),
  };
}

const relative = (a: number | null, b: number): number => Math.abs((a as number) - b) / Math.abs(b);

function checkCase(expected: ExpectedFit, observations: Observation[]): void {
  it(`${expected.name}: exact df and p equal lmerTest's and the differenced ones`, () => {
    const fit =
      expected.model === 'session'
        ? fitSessionModel(observations).fit
        : fitPeriodModel(observations, { withProductSession: expected.terms.includes('product:session') }).fit;
    const objective = makeRemlObjective(fit.frame);
    const { exactMethod, exact, differences } = productTests(objective, Float64Array.from(fit.theta));
    expect(exactMethod).toBe('exact');
    const want = expected.productTest!;
    expect(relative(exact.denDf, want.denDf), `denDf ours ${exact.denDf}, lmerTest ${want.denDf}`).toBeLessThanOrEqual(tol.DENOMINATOR_DF_RELATIVE);
    expect(relative(exact.pValue, want.p), `p ours ${exact.pValue}, lmerTest ${want.p}`).toBeLessThanOrEqual(tol.P_VALUE_RELATIVE);
    expect(relative(exact.denDf, differences.denDf as number)).toBeLessThanOrEqual(METHODS_AGREE_RELATIVE);
    expect(relative(exact.pValue, differences.pValue as number)).toBeLessThanOrEqual(METHODS_AGREE_RELATIVE);
  });
}

describe('exact Satterthwaite df vs lmerTest fixtures', () => {
  for (const expected of loadCases('lmm-seeded.json').filter((c) => c.reml && c.productTest)) checkCase(expected, observationsFromData(expected.data!));
  for (const expected of loadCases('lmm-ergostool.json').filter((c) => c.reml && c.productTest)) checkCase(expected, observationsFromData(expected.data!, 'effort'));
  const rows = readGplCsv('tvbo.csv');
  describe('TVbo (GPL data in test/fixtures/json/gpl/)', () => {
    for (const expected of loadCases('lmm-tvbo.json').filter((c) => c.model === 'session')) {
      const dropped = new Set((expected.rowsDropped ?? []).map((row) => row - 1));
      const observations: Observation[] = rows
        .filter((_, index) => !dropped.has(index))
        .map((row) => ({ session: 'S1', assessor: row.assessor, product: row.product, replicate: Number(row.replicate), attribute: expected.attribute!, value: Number(row[expected.attribute!]) }));
      checkCase(expected, observations);
    }
  });
});

/** Richardson extrapolation of central differences (steps h and h/2): error O(h⁴). */
function richardson(f: (delta: number) => Float64Array, h: number): Float64Array {
  const d1 = f(h).map((value, i) => (value - f(-h)[i]) / (2 * h));
  const d2 = f(h / 2).map((value, i) => (value - f(-h / 2)[i]) / h);
  return d2.map((value, i) => (4 * value - d1[i]) / 3);
}

function checkAgainstDifferences(objective: RemlObjective, theta: Float64Array): void {
  const sigma = objective.solve(theta).sigma;
  const sigma2 = sigma * sigma;
  const pieces = objective.secondOrderPieces(theta)!;
  const nTheta = objective.nTheta;
  const sizes = objective.frame.terms.map((term) => term.levels.length);
  const gradientAt = (point: Float64Array): Float64Array => {
    const g = objective.gradientPieces(point)!;
    return Float64Array.from(g.traceT, (_, k) => (2 * (sizes[k] - g.traceT[k] - g.modeSquares[k] / sigma2)) / point[k]);
  };
  for (let l = 0; l < nTheta; l++) {
    const shifted = (delta: number): Float64Array => {
      const point = theta.slice();
      point[l] += delta;
      return point;
    };
    const h = 1e-3 * theta[l];
    const hessianColumn = richardson((delta) => gradientAt(shifted(delta)), h);
    const covDerivative = richardson((delta) => objective.unscaledCovBeta(shifted(delta)), h);
    for (let k = 0; k < nTheta; k++) {
      let exact = (-4 * pieces.traceProducts[k * nTheta + l]) / (theta[k] * theta[l]) + (8 * theta[k] * theta[l] * pieces.residualProducts[k * nTheta + l]) / sigma2;
      if (k === l) exact += (2 * (sizes[k] - pieces.traceT[k] - pieces.modeSquares[k] / sigma2)) / (theta[k] * theta[k]);
      const scale = Math.max(...hessianColumn.map(Math.abs));
      expect(Math.abs(exact - hessianColumn[k]) / scale, `∂²h/∂θ_${k}∂θ_${l}`).toBeLessThanOrEqual(1e-6);
    }
    const scale = Math.max(...covDerivative.map(Math.abs));
    pieces.unscaledCovBetaDerivatives[l].forEach((value, index) => {
      expect(Math.abs(value - covDerivative[index]) / scale, `∂C/∂θ_${l}`).toBeLessThanOrEqual(1e-6);
    });
  }
}

// Invented unbalanced period design: 5 assessors × 3 products × 4 sessions, some ratings missing.
function periodFrame() {
  const assessor: string[] = [];
  const product: string[] = [];
  const session: string[] = [];
  const response: number[] = [];
  let state = 7;
  const next = () => ((state = (state * 48271) % 2147483647) / 2147483647) - 0.5;
  for (let a = 0; a < 5; a++)
    for (let s = 0; s < 4; s++)
      for (let p = 0; p < 3; p++) {
        if ((a * 7 + s * 3 + p) % 11 === 0) continue;
        assessor.push(`A${a}`);
        product.push(`P${p}`);
        session.push(`S${s}`);
        response.push(5 + p + 0.8 * Math.sin(a) + 0.5 * Math.cos(3 * s) + 0.4 * Math.sin(a * p + s) + next());
      }
  return { response, columns: { assessor, product, session }, fixedFactor: 'product' };
}

describe('exact θ Hessian and ∂cov(β̂)/∂θ vs Richardson differences', () => {
  const terms = [['assessor'], ['session'], ['assessor', 'product'], ['assessor', 'session'], ['product', 'session']];
  it('REML, unbalanced period design, all θ ≥ 10⁻² (summed in nK×nK pieces)', () => {
    checkAgainstDifferences(makeRemlObjective(buildModelFrame({ ...periodFrame(), randomTerms: terms })), Float64Array.from([0.9, 0.5, 0.4, 0.3, 0.2]));
  });
  it('REML, one component at 5·10⁻³ (summed entry by entry)', () => {
    checkAgainstDifferences(makeRemlObjective(buildModelFrame({ ...periodFrame(), randomTerms: terms })), Float64Array.from([0.9, 0.5, 0.005, 0.3, 0.2]));
  });
  it('ML objective', () => {
    checkAgainstDifferences(makeRemlObjective(buildModelFrame({ ...periodFrame(), randomTerms: terms }), { reml: false }), Float64Array.from([0.7, 0.6, 0.3, 0.4, 0.25]));
  });
  it('a component at 0 is left out, as with differences', () => {
    const objective = makeRemlObjective(buildModelFrame({ ...periodFrame(), randomTerms: terms }));
    const theta = Float64Array.from([0.9, 0, 0.4, 0.3, 0.2]);
    const sigma = objective.solve(theta).sigma;
    const exact = varparCovariance(objective, theta, sigma);
    const differences = varparCovariance(objective, theta, sigma, { method: 'differences' });
    expect(exact.method).toBe('exact');
    expect(exact.freeComponents).toEqual([0, 2, 3, 4]);
    const scale = Math.max(...differences.covariance.map(Math.abs));
    exact.covariance.forEach((value, index) => expect(Math.abs(value - differences.covariance[index]) / scale).toBeLessThanOrEqual(1e-5));
  });
});
