/**
 * Reliability indices against published worked examples and R (psych::ICC, psych::alpha,
 * friedman.test), fixtures written by test/fixtures/r/indices.R.
 */
import { describe, expect, it } from 'vitest';
import { cronbachAlpha } from '../../../analysis/reliability/cronbach-alpha.js';
import { assessorsNeeded, generalizabilityCoefficients, productVarianceFromMeanSquares } from '../../../analysis/reliability/generalizability.js';
import { kendallW } from '../../../analysis/reliability/kendall-w.js';
import { seededRandom } from '../../../analysis/reliability/seeded-random.js';
import { shroutFleissIcc, type IccForm } from '../../../analysis/reliability/shrout-fleiss-icc.js';
import { twoWayMeanSquares } from '../../../analysis/reliability/two-way-mean-squares.js';
import { balancedAnova } from '../../../analysis/indices/balanced-anova.js';
import { buildCellTable } from '../../../analysis/indices/cell-table.js';
import { deviationLog, expectCloseOrNull, expectPValueClose, readGplData, readFixture, toObservations, type ColumnData } from '../indices/fixture-helpers.js';

/** psych::ICC values and F: the same closed forms as ours, compared at the 1e-9 for classic indices. */
const ICC_TOLERANCE = 1e-9;
/** The interval bounds go through F quantiles (jstat's inverse incomplete beta): observed ≤ 2.4e-9 vs psych. */
const ICC_BOUND_TOLERANCE = 1e-6;

interface PsychIcc {
  form: string;
  value: number;
  F: number;
  df1: number;
  df2: number;
  p: number;
  lower: number;
  upper: number;
}
interface PsychReliability {
  icc: PsychIcc[];
  /** Textbook formula (Cronbach 1951) in R. */
  cronbachAlpha: number;
  /** psych::alpha, null when an assessor is constant (psych then deletes the item). */
  psychAlpha: number | null;
  kendallW: number;
  friedmanChiSquare: number;
  friedmanDf: number;
  friedmanP: number;
  excludedJudges: number[];
}

const PSYCH_ROW: Record<string, IccForm> = {
  Single_raters_absolute: 'ICC(1,1)',
  Single_random_raters: 'ICC(2,1)',
  Single_fixed_raters: 'ICC(3,1)',
  Average_raters_absolute: 'ICC(1,k)',
  Average_random_raters: 'ICC(2,k)',
  Average_fixed_raters: 'ICC(3,k)',
};

function compareWithPsych(matrix: number[][], expected: PsychIcc[], label: string, confidenceLevel = 0.95): void {
  const result = shroutFleissIcc(matrix, { confidenceLevel });
  for (const want of expected) {
    const got = result.estimates.find((estimate) => estimate.form === PSYCH_ROW[want.form])!;
    const where = `${label} ${got.form}`;
    if (want.value !== undefined) {
      expectCloseOrNull(got.value, want.value, `${where} value`, ICC_TOLERANCE);
      expectCloseOrNull(got.F, want.F, `${where} F`, ICC_TOLERANCE);
      expect(got.dfNumerator).toBe(want.df1);
      expect(got.dfDenominator).toBe(want.df2);
      expectPValueClose(got.pValue, want.p, `${where} p`);
    }
    expectCloseOrNull(got.lower, want.lower, `${where} lower`, ICC_BOUND_TOLERANCE);
    expectCloseOrNull(got.upper, want.upper, `${where} upper`, ICC_BOUND_TOLERANCE);
  }
}

/** products × assessors matrix of cell means, in first-seen order. */
function cellMeanMatrix(data: ColumnData): number[][] {
  const table = buildCellTable(toObservations(data, 'S', 'a'));
  const anova = balancedAnova(table);
  if (anova) return table.products.map((_, p) => anova.cellMeans.map((row) => row[p]));
  return table.products.map((product) =>
    table.assessors.map((assessor) => {
      const cell = table.values.get(assessor)!.get(product)!;
      return cell.reduce((sum, value) => sum + value, 0) / cell.length;
    }),
  );
}

const examples = readFixture<{
  shroutFleiss: { matrix: number[][]; icc: PsychIcc[]; icc90: PsychIcc[]; cronbachAlpha: number };
  kendallSmall: { scores: number[][]; W: number; friedmanChiSquare: number; friedmanP: number; exactPermutationP: number };
}>('indices-examples.json');

describe('Shrout & Fleiss (1979) Table 2: 6 targets × 4 judges', () => {
  const matrix = examples.shroutFleiss.matrix;

  it('ICCs match the published values to two decimals (.17 .29 .71 .44 .62 .91; from memory of the paper, methods notes §7.1)', () => {
    const published: Record<IccForm, number> = { 'ICC(1,1)': 0.17, 'ICC(2,1)': 0.29, 'ICC(3,1)': 0.71, 'ICC(1,k)': 0.44, 'ICC(2,k)': 0.62, 'ICC(3,k)': 0.91 };
    for (const estimate of shroutFleissIcc(matrix).estimates) {
      expect(Math.round(estimate.value! * 100) / 100, estimate.form).toBe(published[estimate.form]);
    }
  });

  it('mean squares are BMS 11.241667, JMS 32.486111, EMS 1.019444, WMS 6.263889 (methods notes §7.1, R)', () => {
    const ms = twoWayMeanSquares(matrix);
    expect(ms.betweenTargetsMeanSquare).toBeCloseTo(11.241667, 6);
    expect(ms.betweenJudgesMeanSquare).toBeCloseTo(32.486111, 6);
    expect(ms.residualMeanSquare).toBeCloseTo(1.019444, 6);
    expect(ms.withinTargetsMeanSquare).toBeCloseTo(6.263889, 6);
  });

  it('values, F tests and 95 % and 90 % intervals equal psych::ICC', () => {
    compareWithPsych(matrix, examples.shroutFleiss.icc, 'SF 95%');
    compareWithPsych(matrix, examples.shroutFleiss.icc90, 'SF 90%', 0.9);
    expect(shroutFleissIcc(matrix).icc2IntervalDf).toBeCloseTo(4.7851, 4); // v of methods §7.1
  });

  it("Cronbach's alpha equals psych::alpha and ICC(3,k)", () => {
    expectCloseOrNull(cronbachAlpha(matrix), examples.shroutFleiss.cronbachAlpha, 'alpha', ICC_TOLERANCE);
    const icc3k = shroutFleissIcc(matrix).estimates.find((estimate) => estimate.form === 'ICC(3,k)')!.value!;
    expect(cronbachAlpha(matrix)).toBeCloseTo(icc3k, 12);
  });

  it('a matrix whose targets do not differ leaves every form undefined', () => {
    const flat = [
      [1, 2, 3],
      [1, 2, 3],
      [1, 2, 3],
    ];
    expect(shroutFleissIcc(flat).estimates.every((estimate) => estimate.value === null)).toBe(true);
    expect(() => shroutFleissIcc([[1, 2], [3]])).toThrow(/not complete/);
  });
});

describe("Kendall's W", () => {
  it('3 objects × 4 judges: W = 1/16, Friedman χ² = 0.5 (ProofWiki "Kendall\'s Coefficient of Concordance", arbitrary example 1; R friedman.test)', () => {
    const result = kendallW(examples.kendallSmall.scores);
    expect(result.W).toBeCloseTo(0.0625, 14);
    expectCloseOrNull(result.W, examples.kendallSmall.W, 'W');
    expectCloseOrNull(result.chiSquare, examples.kendallSmall.friedmanChiSquare, 'chi2');
    expectPValueClose(result.pValue, examples.kendallSmall.friedmanP, 'p');
  });

  it('the seeded permutation p-value agrees with the exact p from enumerating all 6^4 rank permutations in R', () => {
    const permutations = 20_000;
    const result = kendallW(examples.kendallSmall.scores, { permutations, seed: 12345 });
    const exact = examples.kendallSmall.exactPermutationP;
    // Binomial standard error of a Monte Carlo p: 4 SE is a generous band that still fails a wrong null distribution.
    const standardError = Math.sqrt((exact * (1 - exact)) / permutations);
    expect(Math.abs(result.permutationPValue! - exact)).toBeLessThan(4 * standardError);
    // Same seed, same answer.
    expect(kendallW(examples.kendallSmall.scores, { permutations, seed: 12345 }).permutationPValue).toBe(result.permutationPValue);
    expect(() => kendallW(examples.kendallSmall.scores, { permutations: 10 })).toThrow(/seed/);
    // A caller's own seeded generator gives the same draws as the built-in one with that seed.
    const own = kendallW(examples.kendallSmall.scores, { permutations: 200, random: seededRandom(99) });
    expect(own.permutationPValue).toBe(kendallW(examples.kendallSmall.scores, { permutations: 200, seed: 99 }).permutationPValue);
  });

  it('perfect agreement gives W = 1; a straight-lining judge is excluded and reported', () => {
    const result = kendallW([
      [1, 2, 3, 4],
      [10, 20, 30, 40],
      [5, 5, 5, 5],
    ]);
    expect(result.W).toBe(1);
    expect(result.excludedJudges).toEqual([2]);
    expect(kendallW([[1, 2], [2, 1]]).W).toBeNull(); // n < 3
  });
});

describe('reliability on the seeded designs and TVbo vs psych and friedman.test', () => {
  const designs = readFixture<{ designs: { name: string; data: ColumnData; reliability: PsychReliability | null }[] }>('indices-designs.json').designs;
  const cases: { label: string; data: ColumnData; reliability: PsychReliability }[] = designs
    .filter((design) => design.reliability !== null)
    .map((design) => ({ label: design.name, data: design.data, reliability: design.reliability! }));
  const tvboExpected = readFixture<{ balanced: { attribute: string; reliability: PsychReliability }[] }>('indices-tvbo.json').balanced;
  const tvboData = readGplData<{ balanced: { attribute: string; data: ColumnData }[] }>('tvbo-indices-data.json');
  for (const want of tvboExpected) cases.push({ label: `TVbo ${want.attribute}`, data: tvboData.balanced.find((entry) => entry.attribute === want.attribute)!.data, reliability: want.reliability });

  it('has the seeded cases', () => expect(cases.length).toBeGreaterThanOrEqual(5));

  for (const { label, data, reliability } of cases) {
    it(label, () => {
      const matrix = cellMeanMatrix(data);
      compareWithPsych(matrix, reliability.icc, label);
      expectCloseOrNull(cronbachAlpha(matrix), reliability.cronbachAlpha, `${label} alpha`, ICC_TOLERANCE);
      if (reliability.psychAlpha !== null) expectCloseOrNull(cronbachAlpha(matrix), reliability.psychAlpha, `${label} psych alpha`, ICC_TOLERANCE);
      const byJudge = matrix[0].map((_, j) => matrix.map((row) => row[j]));
      const w = kendallW(byJudge);
      expectCloseOrNull(w.W, reliability.kendallW, `${label} W`);
      expectCloseOrNull(w.chiSquare, reliability.friedmanChiSquare, `${label} Friedman chi2`);
      expect(w.df).toBe(reliability.friedmanDf);
      expectPValueClose(w.pValue, reliability.friedmanP, `${label} Friedman p`);
      expect(w.excludedJudges).toEqual(reliability.excludedJudges);
    });
  }

  it('balanced: the G coefficients from ANOVA components equal ICC(3,k) and ICC(2,k) of psych (methods §4.1–4.2 identity)', () => {
    for (const { label, data, reliability } of cases) {
      const anova = balancedAnova(buildCellTable(toObservations(data, 'S', 'a')));
      if (!anova) continue;
      const { nAssessors: A, nReplicates: n } = anova;
      const ms = {
        assessor: anova.assessorSumOfSquares / anova.assessorDf,
        product: anova.productSumOfSquares / anova.productDf,
        interaction: anova.interactionSumOfSquares / anova.interactionDf,
        error: anova.errorDf > 0 ? anova.errorSumOfSquares / anova.errorDf : 0,
      };
      // Untruncated moment estimates, so the identity holds exactly (σ²_P may be < 0 only for tiny F).
      const product = (ms.product - ms.interaction) / (A * n);
      if (!(product > 0)) continue;
      const residual = n > 1 ? ms.error : ms.interaction;
      const assessorByProduct = n > 1 ? (ms.interaction - ms.error) / n : 0;
      const assessor = (ms.assessor - ms.interaction) / (anova.nProducts * n);
      if (assessorByProduct < 0 || assessor < 0) continue;
      const g = generalizabilityCoefficients({ product, assessor, assessorByProduct, residual }, { nAssessors: A, nReplicates: n });
      const icc = (form: string) => reliability.icc.find((row) => row.form === form)!.value;
      expectCloseOrNull(g.relativeCoefficient, icc('Average_fixed_raters'), `${label} Erho2`, ICC_TOLERANCE);
      expectCloseOrNull(g.absoluteCoefficient, icc('Average_random_raters'), `${label} Phi`, ICC_TOLERANCE);
      expectCloseOrNull(g.iccConsistencySingle, icc('Single_fixed_raters'), `${label} ICC(3,1) from components`, ICC_TOLERANCE);
      expectCloseOrNull(g.iccAbsoluteSingle, icc('Single_random_raters'), `${label} ICC(2,1) from components`, ICC_TOLERANCE);
      expect(productVarianceFromMeanSquares({ product: ms.product, assessorByProduct: ms.interaction }, { nAssessors: A, nReplicates: n })).toBeCloseTo(product, 12);
    }
  });
});

describe('observed deviations', () => {
  it('stay inside the tolerances (printed for the tolerance notes)', () => {
    expect(deviationLog.worst).toBeLessThan(ICC_BOUND_TOLERANCE);
    console.info(`reliability vs R: worst scaled deviation ${deviationLog.worst.toExponential(2)} (ICC bounds included), worst p-value ${deviationLog.worstPValue.toExponential(2)} relative`);
  });
});

describe('decision study', () => {
  it('assessors needed: Spearman–Brown, rounded up (worked by hand: (0.5 + 1/2)/1 · 0.8/0.2 = 4)', () => {
    const components = { product: 1, assessor: 0.3, assessorByProduct: 0.5, residual: 1 };
    expect(assessorsNeeded(components, { coefficient: 0.8, nReplicates: 2 })).toBe(4);
    expect(assessorsNeeded(components, { coefficient: 0.81, nReplicates: 2 })).toBe(5);
    // Check by plugging back: 4 assessors reach exactly 0.8.
    expect(generalizabilityCoefficients(components, { nAssessors: 4, nReplicates: 2 }).relativeCoefficient).toBeCloseTo(0.8, 12);
    expect(assessorsNeeded({ ...components, product: 0 }, { coefficient: 0.8, nReplicates: 2 })).toBeNull();
  });
});
