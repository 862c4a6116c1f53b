/**
 * Per-assessor indices on lmerTest's TVbo (8 assessors × 12 products × 2 replicates, 15
 * attributes), balanced and with rows and cells removed, against plain R (indices-tvbo.json).
 * TVbo is GPL (>= 2) data: test/fixtures/r/indices.R writes it to test/fixtures/json/gpl/, the
 * committed folder of GPL test data (its README names origin and licence).
 */
import { describe, expect, it } from 'vitest';
import { balancedAnova } from '../../../analysis/indices/balanced-anova.js';
import { buildCellTable } from '../../../analysis/indices/cell-table.js';
import { interactionShare } from '../../../analysis/indices/agreement.js';
import { pairedLevelTest } from '../../../analysis/indices/level.js';
import { computeAssessorIndices } from '../../../analysis/indices/compute-assessor-indices.js';
import { scalingDisagreementPartition } from '../../../analysis/indices/scaling-partition.js';
import { kendallW } from '../../../analysis/reliability/kendall-w.js';
import { shroutFleissIcc } from '../../../analysis/reliability/shrout-fleiss-icc.js';
import { deviationLog, readFixture, readGplData, toObservations, type ColumnData } from './fixture-helpers.js';
import { compareSessionIndices, type ExpectedSessionIndices } from './compare-indices.js';

interface TvboExpected extends ExpectedSessionIndices {
  attribute: string;
}
const expected = readFixture<{ balanced: TvboExpected[]; unbalanced: TvboExpected[] }>('indices-tvbo.json');
const cache = readGplData<{ balanced: { attribute: string; data: ColumnData }[]; unbalanced: { attribute: string; data: ColumnData }[] }>('tvbo-indices-data.json');

describe('per-assessor indices vs plain R on TVbo (data in gpl/, committed expected values)', () => {
  for (const variant of ['balanced', 'unbalanced'] as const) {
    for (const want of expected[variant]) {
      it(`${variant} ${want.attribute}`, () => {
        const data = cache[variant].find((entry) => entry.attribute === want.attribute)!.data;
        compareSessionIndices(toObservations(data, 'TVbo', want.attribute), want, `${variant} ${want.attribute}`);
      });
    }
  }

  it('Coloursaturation reproduces the methods notes §7.6 table (self-computed in R by a colleague, 03_assessor.R)', () => {
    const data = cache.balanced.find((entry) => entry.attribute === 'Coloursaturation')!.data;
    const observations = toObservations(data, 'TVbo', 'Coloursaturation');
    const table = buildCellTable(observations);
    const anova = balancedAnova(table)!;
    // Columns L_a, t (df 11), F_disc, r_a, share of SS_AP, F_int, beta, as printed to 4–5 significant digits.
    const notes: Record<string, [number, number, number, number, number, number, number]> = {
      '1': [0.67976, 1.9255, 3.442, 0.5731, 0.16329, 3.4703, 0.7894],
      '3': [-0.46786, -1.2815, 3.31, 0.8436, 0.17462, 3.7111, 1.5551],
      '6': [-1.00595, -3.1847, 10.701, 0.7419, 0.13072, 2.7782, 1.1222],
      '8': [0.46071, 3.4971, 10.279, 0.933, 0.02274, 0.4833, 1.0172],
    };
    const indices = computeAssessorIndices(observations);
    for (const [assessor, [loo, t, fDisc, r, share, fInt, beta]] of Object.entries(notes)) {
      const row = indices.find((entry) => entry.assessor === assessor)!;
      const level = pairedLevelTest(table, assessor);
      expect(level.looOffset).toBeCloseTo(loo, 5);
      expect(row.offsetT).toBeCloseTo(t, 4);
      expect(row.offsetDf).toBe(11);
      expect(row.discriminationF! / fDisc).toBeCloseTo(1, 3);
      expect(row.agreementR).toBeCloseTo(r, 4);
      expect(interactionShare(anova, table.assessors.indexOf(assessor))).toBeCloseTo(share, 5);
      expect(row.disagreementF).toBeCloseTo(fInt, 4);
      expect(row.scaling).toBeCloseTo(beta, 4);
      // Balanced: the contract offset is (A − 1)/A of the leave-one-out offset.
      expect(row.offset).toBeCloseTo((7 / 8) * level.looOffset!, 12);
    }
    // Identities of the notes: shares sum to 1, scaling coefficients sum to A = 8.
    const shares = table.assessors.map((_, index) => interactionShare(anova, index)!);
    expect(shares.reduce((sum, value) => sum + value, 0)).toBeCloseTo(1, 12);
    expect(indices.reduce((sum, row) => sum + row.scaling!, 0)).toBeCloseTo(8, 12);
  });

  it('Coloursaturation reliability reproduces methods §7.6 (ICC(3,1) 0.56011, ICC(3,8) 0.91061, partition) except W', () => {
    const data = cache.balanced.find((entry) => entry.attribute === 'Coloursaturation')!.data;
    const anova = balancedAnova(buildCellTable(toObservations(data, 'TVbo', 'Coloursaturation')))!;
    const matrix = anova.cellMeans[0].map((_, p) => anova.cellMeans.map((row) => row[p]));
    const icc = shroutFleissIcc(matrix).estimates;
    expect(icc.find((e) => e.form === 'ICC(3,1)')!.value).toBeCloseTo(0.56011, 5);
    expect(icc.find((e) => e.form === 'ICC(3,k)')!.value).toBeCloseTo(0.91061, 5);
    // The notes' W = 0.649376 (tie sums 0 0 0 6 0 6 18 6) came from R's rank() on unrounded cell
    // means, where equal-on-paper means such as assessor 3's differ in the last bit and their tie is
    // broken. With the ties kept (R: rank(round(M, 9)), tie sums 0 0 12 6 0 6 36 6) W = 0.6492095.
    const w = kendallW(anova.cellMeans);
    expect(w.W).toBeCloseTo(0.6492095, 7);
    expect(w.W).not.toBeCloseTo(0.649376, 5);
    const partition = scalingDisagreementPartition(anova)!;
    expect(partition.scalingSumOfSquares).toBeCloseTo(50.861, 3);
    expect(partition.disagreementSumOfSquares).toBeCloseTo(103.408, 3);
    expect(partition.productFCorrected).toBeCloseTo(15.1713, 4);
  });

  it('worst deviation from R on TVbo', () => {
    expect(deviationLog.worst).toBeLessThan(1e-11);
    expect(deviationLog.worstPValue).toBeLessThan(1e-6);
    console.info(`TVbo indices vs R: worst statistic deviation ${deviationLog.worst.toExponential(2)}, worst p-value ${deviationLog.worstPValue.toExponential(2)} relative`);
  });
});
