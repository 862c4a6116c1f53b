/**
 * Reliability of product means from a stored session fit, against psych::ICC (R, fixtures of
 * test/fixtures/r/indices.R): on balanced designs the relative G coefficient equals ICC(3,k)
 * of the assessor × product matrix of cell means (McGraw & Wong 1996, ICC(C,k) = 1 − 1/F).
 */
import { describe, expect, it } from 'vitest';
import { fitSessionModel } from '../../../analysis/lmm/fit-session-model.js';
import { productMeanReliability } from '../../../analysis/reliability/product-mean-reliability.js';
import { readFixture, toObservations, type ColumnData } from '../indices/fixture-helpers.js';

interface Design {
  name: string;
  balanced: boolean;
  data: ColumnData;
  reliability: { icc: { form: string; value: number }[] };
}

const designs = readFixture<{ designs: Design[] }>('indices-designs.json').designs;

describe('reliability of product means from a session fit', () => {
  const checked: string[] = [];
  for (const design of designs.filter((d) => d.balanced)) {
    it(`${design.name}: relative coefficient = psych ICC(3,k) on cell means`, () => {
      const fit = fitSessionModel(toObservations(design.data, 'S', 'a')).json;
      const want = design.reliability.icc.find((row) => row.form === 'Average_fixed_raters')!.value;
      const got = productMeanReliability(fit)!;
      // REML variance components on the boundary (σ²_AP = 0) break the ANOVA identity; those designs are skipped here.
      if ((fit.variance['assessor:product'] ?? 1) <= 0 || fit.variance.assessor <= 0) return;
      expect(got.relativeCoefficient!).toBeCloseTo(want, 8);
      expect(got.absoluteCoefficient!).toBeLessThanOrEqual(got.relativeCoefficient! + 1e-12);
      checked.push(design.name);
    });
  }
  it('checked at least two designs against R', () => {
    expect(checked.length).toBeGreaterThanOrEqual(2);
  });
  it('no product F, no coefficient', () => {
    const fit = fitSessionModel(toObservations(designs[0].data, 'S', 'a')).json;
    expect(productMeanReliability({ ...fit, productTest: { ...fit.productTest, F: null } })).toBeNull();
  });
});
