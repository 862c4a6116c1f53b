/**
 * Compares every per-assessor index of one session/attribute with the values plain R computed
 * (test/fixtures/r/indices.R); shared by the seeded-design and TVbo tests.
 */
import { expect } from 'vitest';
import { computeAssessorIndices } from '../../../analysis/indices/compute-assessor-indices.js';
import { balancedAnova } from '../../../analysis/indices/balanced-anova.js';
import { buildCellTable } from '../../../analysis/indices/cell-table.js';
import { pooledLevelTest } from '../../../analysis/indices/level.js';
import { scalingCoefficient } from '../../../analysis/indices/scaling.js';
import { scalingDisagreementPartition } from '../../../analysis/indices/scaling-partition.js';
import { expectCloseOrNull, expectPValueClose } from './fixture-helpers.js';

export interface ExpectedAssessor {
  assessor: string;
  nProducts: number;
  nRatings: number;
  offset: number | null;
  discriminationF: number | null;
  discriminationP: number | null;
  discriminationDfNumerator: number | null;
  discriminationDfDenominator: number | null;
  repeatabilityMSE: number | null;
  repeatabilityDf: number | null;
  agreementR: number | null;
  scaling: number | null;
  offsetT: number | null;
  offsetDf: number | null;
  offsetP: number | null;
  repeatabilitySdRatio: number | null;
  repeatabilityF: number | null;
  repeatabilityP: number | null;
  disagreementF: number | null;
  disagreementP: number | null;
  scalingT: number | null;
  scalingP: number | null;
  disagreementSdAfterScaling: number | null;
  pooledOffsetT: number | null;
  pooledOffsetP: number | null;
}

export interface ExpectedAnova {
  assessorSumOfSquares: number;
  productSumOfSquares: number;
  interactionSumOfSquares: number;
  errorSumOfSquares: number;
  partition?: {
    scalingSumOfSquares: number;
    disagreementSumOfSquares: number;
    disagreementDf: number;
    scalingF: number;
    scalingP: number;
    disagreementF: number | null;
    disagreementP: number | null;
    productFCorrected: number;
    productPCorrected: number;
  };
}

export interface ExpectedSessionIndices {
  balanced: boolean;
  assessors: ExpectedAssessor[];
  anova?: ExpectedAnova;
}

const PVALUE_FIELDS = new Set(['discriminationP', 'offsetP', 'repeatabilityP', 'disagreementP', 'scalingP']);
const COMPARED_FIELDS = [
  'offset',
  'discriminationF',
  'discriminationP',
  'discriminationDfNumerator',
  'discriminationDfDenominator',
  'repeatabilityMSE',
  'repeatabilityDf',
  'agreementR',
  'scaling',
  'offsetT',
  'offsetDf',
  'offsetP',
  'repeatabilitySdRatio',
  'repeatabilityF',
  'repeatabilityP',
  'disagreementF',
  'disagreementP',
  'scalingT',
  'scalingP',
] as const;

/** Compares every index of one session/attribute with the R values; shared with the TVbo test. */
export function compareSessionIndices(observations: Parameters<typeof computeAssessorIndices>[0], expected: ExpectedSessionIndices, label: string): void {
  const actual = computeAssessorIndices(observations);
  expect(actual.map((row) => row.assessor).sort()).toEqual(expected.assessors.map((row) => row.assessor).sort());
  const table = buildCellTable(observations);
  const anova = balancedAnova(table);
  expect(anova !== null, `${label}: balanced`).toBe(expected.balanced);
  for (const want of expected.assessors) {
    const got = actual.find((row) => row.assessor === want.assessor)!;
    const where = `${label} ${want.assessor}`;
    expect(got.nProducts, `${where} nProducts`).toBe(want.nProducts);
    expect(got.nRatings, `${where} nRatings`).toBe(want.nRatings);
    for (const field of COMPARED_FIELDS) {
      if (PVALUE_FIELDS.has(field)) expectPValueClose(got[field], want[field], `${where} ${field}`);
      else expectCloseOrNull(got[field], want[field], `${where} ${field}`);
    }
    const scaling = scalingCoefficient(table, want.assessor, anova);
    expectCloseOrNull(scaling.disagreementSd, want.disagreementSdAfterScaling, `${where} s_D`);
    const pooled = pooledLevelTest(anova, table.assessors.indexOf(want.assessor));
    expectCloseOrNull(pooled.t, want.pooledOffsetT, `${where} pooled t`);
    expectPValueClose(pooled.pValue, want.pooledOffsetP, `${where} pooled p`);
    // Every null has a reason.
    const nullFields = COMPARED_FIELDS.filter((field) => got[field] === null);
    if (nullFields.length > 0) expect(got.reasons.length, `${where} reasons for ${nullFields.join(', ')}`).toBeGreaterThan(0);
  }
  if (expected.anova) {
    expect(anova).not.toBeNull();
    expectCloseOrNull(anova!.assessorSumOfSquares, expected.anova.assessorSumOfSquares, `${label} SS_A`);
    expectCloseOrNull(anova!.productSumOfSquares, expected.anova.productSumOfSquares, `${label} SS_P`);
    expectCloseOrNull(anova!.interactionSumOfSquares, expected.anova.interactionSumOfSquares, `${label} SS_AP`);
    expectCloseOrNull(anova!.errorSumOfSquares, expected.anova.errorSumOfSquares, `${label} SS_E`);
    const want = expected.anova.partition;
    if (want) {
      const got = scalingDisagreementPartition(anova!)!;
      expectCloseOrNull(got.scalingSumOfSquares, want.scalingSumOfSquares, `${label} SS_scal`);
      expectCloseOrNull(got.disagreementSumOfSquares, want.disagreementSumOfSquares, `${label} SS_D`);
      expect(got.disagreementDf).toBe(want.disagreementDf);
      expectCloseOrNull(got.scalingF, want.scalingF, `${label} F_scal`);
      expectPValueClose(got.scalingP, want.scalingP, `${label} p_scal`);
      expectCloseOrNull(got.disagreementF, want.disagreementF, `${label} F_D`);
      expectPValueClose(got.disagreementP, want.disagreementP, `${label} p_D`);
      expectCloseOrNull(got.productFCorrected, want.productFCorrected, `${label} F_P*`);
      expectPValueClose(got.productPCorrected, want.productPCorrected, `${label} p_P*`);
    }
  }
}
