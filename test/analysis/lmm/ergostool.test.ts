/**
 * nlme's ergoStool, model M1 (effort ~ Type + (1|Subject)), balanced, no replicates.
 * Data as printed in Pinheiro & Bates (2000), Mixed-Effects Models in S and S-PLUS, section 1.2
 * (published worked example; the 36 values are the book's). Published REML SDs 1.3325 (Subject)
 * and 1.1003 (residual) — recalled from memory of the book, so checked only to the 4 digits
 * printed; the remaining values were recomputed with lme4 1.1-31 / lmerTest 3.1-3 in the
 * methods notes §7.3 (R 4.2.2) and are regenerated in test/fixtures/json/lmm-ergostool.json.
 */
import { describe, expect, it } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';
import { fitSessionModel } from '../../../analysis/lmm/fit-session-model.js';

export const ERGO_STOOL_EFFORT = [
  [12, 15, 12, 10],
  [10, 14, 13, 12],
  [7, 14, 13, 9],
  [7, 11, 10, 9],
  [8, 11, 8, 7],
  [9, 11, 11, 10],
  [8, 12, 12, 11],
  [7, 11, 8, 7],
  [9, 13, 10, 8],
];

export function ergoStoolObservations(): Observation[] {
  const rows: Observation[] = [];
  ERGO_STOOL_EFFORT.forEach((efforts, subject) =>
    efforts.forEach((value, type) =>
      rows.push({ session: 'ergo', attribute: 'effort', assessor: String(subject + 1), product: `T${type + 1}`, replicate: 1, value }),
    ),
  );
  return rows;
}

describe('ergoStool (Pinheiro & Bates 2000)', () => {
  const result = fitSessionModel(ergoStoolObservations(), { withDiagnostics: true });

  it('reproduces the published REML standard deviations to the printed 4 decimals', () => {
    expect(Math.sqrt(result.json.variance.assessor)).toBeCloseTo(1.3325, 4);
    expect(Math.sqrt(result.json.variance.residual)).toBeCloseTo(1.1003, 4);
    expect(result.json.variance['assessor:product']).toBeNull();
  });

  it('takes the balanced fast path and matches the R values of methods §7.3', () => {
    expect(result.diagnostics!.balancedFastPath).toBe(true);
    expect(result.json.remlCriterion).toBeCloseTo(121.130789, 5);
    expect(result.json.productTest.F).toBeCloseTo(22.3556, 4);
    expect(result.json.productTest.numDf).toBe(3);
    expect(result.json.productTest.denDf).toBe(24);
    expect(result.json.productTest.p! / 3.935e-7).toBeCloseTo(1, 3);
    const blups = result.json.assessorEffects.map((effect) => effect.blup);
    [1.708716, 1.708716, 0.427179, -0.854358, -1.495127, 0, 0.427179, -1.708716, -0.21359].forEach((expected, index) =>
      expect(blups[index]).toBeCloseTo(expected, 5),
    );
    for (const effect of result.json.assessorEffects) expect(effect.condSD).toBeCloseTo(0.508509, 5);
  });
});
