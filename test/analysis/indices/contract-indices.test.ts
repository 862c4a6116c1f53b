/**
 * The analyze contract's five indices (contract-indices.ts, the one implementation that
 * computeAssessorIndices also takes them from) against plain R (test/fixtures/r/indices.R:
 * one-way ANOVA via lm(), cor(), cov()/var()) on the seeded designs of indices-designs.json,
 * in the rows' own order and with the rows reversed (first-seen order of assessors changes,
 * the values must not).
 */
import { describe, expect, it } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';
import { computeAnalyzeContractIndices } from '../../../analysis/indices/compute-assessor-indices.js';
import type { ExpectedSessionIndices } from './compare-indices.js';
import { expectCloseOrNull, expectPValueClose, readFixture, toObservations, type ColumnData } from './fixture-helpers.js';

interface DesignFixture extends ExpectedSessionIndices {
  name: string;
  data: ColumnData;
}

const fixture = readFixture<{ designs: DesignFixture[] }>('indices-designs.json');

describe('analyze-contract indices vs plain R (indices-designs.json)', () => {
  for (const design of fixture.designs) {
    for (const order of ['as written', 'reversed'] as const) {
      it(`${design.name}, rows ${order}`, () => {
        const observations = toObservations(design.data, 'S01', 'attr');
        if (order === 'reversed') observations.reverse();
        const rows = computeAnalyzeContractIndices(observations);
        expect(rows.map((row) => row.assessor).sort()).toEqual(design.assessors.map((row) => row.assessor).sort());
        for (const want of design.assessors) {
          const got = rows.find((row) => row.assessor === want.assessor)!;
          const where = `${design.name} ${want.assessor}`;
          expect(got.session).toBe('S01');
          expect(got.attribute).toBe('attr');
          expectCloseOrNull(got.offset, want.offset, `${where} offset`);
          expectCloseOrNull(got.discriminationF, want.discriminationF, `${where} discriminationF`);
          expectPValueClose(got.discriminationP, want.discriminationP, `${where} discriminationP`);
          expectCloseOrNull(got.repeatabilityMSE, want.repeatabilityMSE, `${where} repeatabilityMSE`);
          expectCloseOrNull(got.agreementR, want.agreementR, `${where} agreementR`);
          expectCloseOrNull(got.scaling, want.scaling, `${where} scaling`);
        }
      });
    }
  }

  it('refuses mixed groups and non-finite values as buildCellTable does', () => {
    const base: Observation = { session: 'S1', attribute: 'crisp', assessor: 'A1', product: '101', replicate: 1, value: 5 };
    expect(computeAnalyzeContractIndices([])).toEqual([]);
    expect(() => computeAnalyzeContractIndices([base, { ...base, session: 'S2' }])).toThrow(/one session and one attribute/);
    expect(() => computeAnalyzeContractIndices([base, { ...base, attribute: 'soft' }])).toThrow(/one session and one attribute/);
    expect(() => computeAnalyzeContractIndices([base, { ...base, value: Number.NaN }])).toThrow(/not a finite number/);
  });
});
