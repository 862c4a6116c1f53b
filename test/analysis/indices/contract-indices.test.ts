/**
 * The analyze contract's flat-array indices (contract-indices.ts) against the general
 * composition (computeAssessorIndices over buildCellTable, itself checked against plain R in
 * indices-designs.test.ts): the same five values, to the last bit, on random panels with
 * missing ratings, missing whole cells, lone raters of a product and shuffled row order.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';
import { computeAnalyzeContractIndices, computeAssessorIndices } from '../../../analysis/indices/compute-assessor-indices.js';

const panelArbitrary = fc
  .record({
    nAssessors: fc.integer({ min: 1, max: 6 }),
    nProducts: fc.integer({ min: 1, max: 6 }),
    nReplicates: fc.integer({ min: 1, max: 3 }),
    values: fc.array(fc.integer({ min: 0, max: 100 }), { minLength: 108, maxLength: 108 }),
    keep: fc.array(fc.integer({ min: 0, max: 9 }), { minLength: 108, maxLength: 108 }),
    dropRate: fc.integer({ min: 0, max: 6 }),
    order: fc.array(fc.nat(), { minLength: 108, maxLength: 108 }),
  })
  .map(({ nAssessors, nProducts, nReplicates, values, keep, dropRate, order }) => {
    const rows: { row: Observation; key: number }[] = [];
    let i = 0;
    for (let a = 0; a < nAssessors; a++) {
      for (let p = 0; p < nProducts; p++) {
        for (let r = 1; r <= nReplicates; r++, i++) {
          if (keep[i] < dropRate) continue;
          rows.push({ row: { session: 'S1', attribute: 'crisp', assessor: `A${a}`, product: String(100 + p), replicate: r, value: values[i] / 10 }, key: order[i] });
        }
      }
    }
    return rows.sort((x, y) => x.key - y.key).map((entry) => entry.row);
  });

const contractFields = (row: ReturnType<typeof computeAssessorIndices>[number]) => ({
  session: row.session,
  attribute: row.attribute,
  assessor: row.assessor,
  offset: row.offset,
  discriminationF: row.discriminationF,
  discriminationP: row.discriminationP,
  repeatabilityMSE: row.repeatabilityMSE,
  agreementR: row.agreementR,
  scaling: row.scaling,
});

describe('analyze-contract indices on flat arrays', () => {
  it('equal the matching fields of computeAssessorIndices exactly', () => {
    fc.assert(
      fc.property(panelArbitrary, (observations) => {
        expect(computeAnalyzeContractIndices(observations)).toEqual(computeAssessorIndices(observations).map(contractFields));
      }),
      { numRuns: 300, seed: 20261202 },
    );
  });

  it('refuses mixed groups and non-finite values as buildCellTable does', () => {
    const base: Observation = { session: 'S1', attribute: 'crisp', assessor: 'A1', product: '101', replicate: 1, value: 5 };
    expect(computeAnalyzeContractIndices([])).toEqual([]);
    expect(() => computeAnalyzeContractIndices([base, { ...base, session: 'S2' }])).toThrow(/one session and one attribute/);
    expect(() => computeAnalyzeContractIndices([base, { ...base, attribute: 'soft' }])).toThrow(/one session and one attribute/);
    expect(() => computeAnalyzeContractIndices([base, { ...base, value: Number.NaN }])).toThrow(/not a finite number/);
  });
});
