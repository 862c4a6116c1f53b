/**
 * Properties the indices must have whatever the data (fast-check on random small panels):
 * facts of the trade, common practice, no source beyond the definitions themselves.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';
import { computeAssessorIndices } from '../../../analysis/indices/compute-assessor-indices.js';
import { balancedAnova } from '../../../analysis/indices/balanced-anova.js';
import { buildCellTable } from '../../../analysis/indices/cell-table.js';
import { pairedLevelTest } from '../../../analysis/indices/level.js';
import { scalingDisagreementPartition } from '../../../analysis/indices/scaling-partition.js';

/** Random balanced or unbalanced panels: 3–6 assessors × 3–6 products × 1–3 replicates, values to 0.1. */
const panelArbitrary = fc
  .record({
    nAssessors: fc.integer({ min: 3, max: 6 }),
    nProducts: fc.integer({ min: 3, max: 6 }),
    nReplicates: fc.integer({ min: 1, max: 3 }),
    seedValues: fc.array(fc.integer({ min: 0, max: 100 }), { minLength: 108, maxLength: 108 }),
    dropMask: fc.array(fc.boolean(), { minLength: 108, maxLength: 108 }),
    drop: fc.boolean(),
  })
  .map(({ nAssessors, nProducts, nReplicates, seedValues, dropMask, drop }) => {
    const observations: Observation[] = [];
    let i = 0;
    for (let a = 0; a < nAssessors; a++) {
      for (let p = 0; p < nProducts; p++) {
        for (let r = 1; r <= nReplicates; r++, i++) {
          // Keep the first replicate of every cell so no assessor disappears; drop others at random.
          if (drop && r > 1 && dropMask[i]) continue;
          observations.push({ session: 'S1', attribute: 'crisp', assessor: `A${a}`, product: String(100 + p), replicate: r, value: seedValues[i] / 10 });
        }
      }
    }
    return observations;
  });

const transform = (observations: Observation[], scale: number, shift: number) => observations.map((o) => ({ ...o, value: scale * o.value + shift }));

function close(a: number | null, b: number | null, tolerance = 1e-8): boolean {
  if (a === null || b === null) return a === b;
  return Math.abs(a - b) <= tolerance * Math.max(1, Math.abs(a), Math.abs(b));
}

describe('index properties', () => {
  it('F, p, r and scaling are invariant to a common change of scale units; offset scales with it', () => {
    fc.assert(
      fc.property(panelArbitrary, fc.double({ min: 0.2, max: 20, noNaN: true }), fc.double({ min: -50, max: 50, noNaN: true }), (observations, scale, shift) => {
        const before = computeAssessorIndices(observations);
        const after = computeAssessorIndices(transform(observations, scale, shift));
        before.forEach((row, i) => {
          const other = after[i];
          expect(close(row.discriminationF, other.discriminationF, 1e-7)).toBe(true);
          expect(close(row.agreementR, other.agreementR, 1e-7)).toBe(true);
          expect(close(row.scaling, other.scaling, 1e-7)).toBe(true);
          expect(close(row.offsetT, other.offsetT, 1e-6)).toBe(true);
          expect(close(row.offset === null ? null : row.offset * scale, other.offset, 1e-7)).toBe(true);
          expect(close(row.repeatabilityMSE === null ? null : row.repeatabilityMSE * scale * scale, other.repeatabilityMSE, 1e-7)).toBe(true);
        });
      }),
      { numRuns: 60 },
    );
  });

  it('offsets of a balanced panel sum to 0, scaling coefficients to A, and offset = (A − 1)/A × the leave-one-out offset', () => {
    fc.assert(
      fc.property(panelArbitrary, (observations) => {
        const table = buildCellTable(observations);
        const anova = balancedAnova(table);
        if (anova === null) return;
        const rows = computeAssessorIndices(observations);
        expect(Math.abs(rows.reduce((sum, row) => sum + row.offset!, 0))).toBeLessThan(1e-9);
        const A = rows.length;
        if (rows.every((row) => row.scaling !== null)) expect(rows.reduce((sum, row) => sum + row.scaling!, 0)).toBeCloseTo(A, 9);
        for (const row of rows) expect(row.offset!).toBeCloseTo(((A - 1) / A) * pairedLevelTest(table, row.assessor).looOffset!, 9);
        const partition = scalingDisagreementPartition(anova);
        if (partition) expect(partition.scalingSumOfSquares + partition.disagreementSumOfSquares).toBeCloseTo(anova.interactionSumOfSquares, 9);
      }),
      { numRuns: 60 },
    );
  });

  it('every null field comes with a reason; no NaN or infinity anywhere', () => {
    fc.assert(
      fc.property(panelArbitrary, (observations) => {
        for (const row of computeAssessorIndices(observations)) {
          for (const [key, value] of Object.entries(row)) {
            if (typeof value === 'number') expect(Number.isFinite(value), key).toBe(true);
          }
          const nulls = Object.entries(row).filter(([, value]) => value === null);
          if (nulls.length > 0) expect(row.reasons.length).toBeGreaterThan(0);
        }
      }),
      { numRuns: 80 },
    );
  });

  it('without replicates discrimination and repeatability are null with reason no-replicates', () => {
    const observations: Observation[] = [];
    for (const assessor of ['A', 'B', 'C']) for (const [p, product] of ['1', '2', '3', '4'].entries()) observations.push({ session: 'S', attribute: 'x', assessor, product, replicate: 1, value: p + assessor.charCodeAt(0) / 100 });
    const [row] = computeAssessorIndices(observations);
    expect(row.discriminationF).toBeNull();
    expect(row.discriminationP).toBeNull();
    expect(row.repeatabilityMSE).toBeNull();
    expect(row.reasons).toContain('no-replicates');
  });

  it('an assessor who rated 2 products gets offset and scaling but no agreement r', () => {
    const observations: Observation[] = [];
    for (const assessor of ['A', 'B', 'C', 'D']) {
      for (const [p, product] of ['1', '2', '3', '4'].entries()) {
        if (assessor === 'D' && p >= 2) continue;
        for (const replicate of [1, 2]) observations.push({ session: 'S', attribute: 'x', assessor, product, replicate, value: p * 1.5 + replicate * 0.1 + assessor.charCodeAt(0) / 50 });
      }
    }
    const row = computeAssessorIndices(observations).find((entry) => entry.assessor === 'D')!;
    expect(row.nProducts).toBe(2);
    expect(row.offset).not.toBeNull();
    expect(row.scaling).not.toBeNull();
    expect(row.agreementR).toBeNull();
    expect(row.reasons).toContain('few-products');
  });

  it('withholds the scaling = 1 test when the panel product test is not significant (methods §2.5)', () => {
    fc.assert(
      fc.property(panelArbitrary, (observations) => {
        const open = computeAssessorIndices(observations);
        const gated = computeAssessorIndices(observations, { panelProductPValue: 0.2 });
        const passed = computeAssessorIndices(observations, { panelProductPValue: 0.001 });
        gated.forEach((row, i) => {
          expect(row.scalingT).toBeNull();
          expect(row.scaling).toBe(open[i].scaling);
          if (open[i].scalingT !== null) expect(row.reasons).toContain('panel-not-discriminating');
          expect(passed[i].scalingT).toBe(open[i].scalingT);
        });
      }),
      { numRuns: 30 },
    );
  });

  it('a two-assessor panel has no disagreement test (reason few-assessors) but a discrimination test', () => {
    const observations: Observation[] = [];
    for (const assessor of ['A', 'B']) {
      for (const [p, product] of ['1', '2', '3', '4'].entries()) {
        for (const replicate of [1, 2]) observations.push({ session: 'S', attribute: 'x', assessor, product, replicate, value: p + replicate * 0.3 + (assessor === 'A' ? 0.1 : 0) });
      }
    }
    const [row] = computeAssessorIndices(observations);
    expect(row.disagreementF).toBeNull();
    expect(row.reasons).toContain('few-assessors');
    expect(row.discriminationF).not.toBeNull();
  });

  it('refuses observations from two sessions or attributes', () => {
    const base: Observation = { session: 'S1', attribute: 'x', assessor: 'A', product: '1', replicate: 1, value: 1 };
    expect(() => computeAssessorIndices([base, { ...base, session: 'S2' }])).toThrow(/one session and one attribute/);
    expect(computeAssessorIndices([])).toEqual([]);
  });
});
