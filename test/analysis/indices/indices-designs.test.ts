/**
 * Per-assessor indices against plain R (test/fixtures/r/indices.R) on seeded panel designs whose
 * data are committed in the fixture: balanced, three replicates with a scale-compressing
 * assessor, no replicates, missing rows, missing whole cells with an assessor who rated only 2
 * products, zero-spread edge cases, and a small unbalanced design without replicates.
 * R computes the contract fields exactly as the analyze JSON contract defines them (one-way ANOVA via lm(),
 * cor(), cov()/var()) and the extra tests via t.test() and lm(). Tolerance 1e-9.
 */
import { describe, expect, it } from 'vitest';
import { compareSessionIndices, type ExpectedSessionIndices } from './compare-indices.js';
import { deviationLog, readFixture, toObservations, type ColumnData } from './fixture-helpers.js';

interface DesignFixture extends ExpectedSessionIndices {
  name: string;
  description: string;
  data: ColumnData;
}

const fixture = readFixture<{ designs: DesignFixture[] }>('indices-designs.json');

describe('per-assessor indices vs plain R on seeded designs (indices-designs.json)', () => {
  it('covers the designs the issue asks for', () => {
    expect(fixture.designs.map((design) => design.name)).toEqual(
      expect.arrayContaining(['balanced', 'no-replicates', 'missing-rows', 'missing-cells', 'edge-no-spread']),
    );
    // The assessor who rated only 2 products is there, with agreement and tests undefined.
    const twoProducts = fixture.designs.find((design) => design.name === 'missing-cells')!.assessors.find((row) => row.assessor === 'A03')!;
    expect(twoProducts.nProducts).toBe(2);
    expect(twoProducts.agreementR).toBeNull();
    expect(twoProducts.scaling).not.toBeNull();
  });

  for (const design of fixture.designs) {
    it(`${design.name}: ${design.description}`, () => {
      compareSessionIndices(toObservations(design.data, 'S01', 'attr'), design, design.name);
    });
  }

  it('the largest deviation from R stays far inside the tolerances', () => {
    // Runs after the cases above (vitest runs a file's tests in order).
    expect(deviationLog.worst).toBeGreaterThan(0);
    expect(deviationLog.worst).toBeLessThan(1e-11);
    expect(deviationLog.worstPValue).toBeLessThan(1e-6);
    console.info(`indices vs R: worst statistic deviation ${deviationLog.worst.toExponential(2)}, worst p-value ${deviationLog.worstPValue.toExponential(2)} relative`);
  });
});
