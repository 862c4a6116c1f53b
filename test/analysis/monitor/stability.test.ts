/**
 * Product-effect stability pieces against test/fixtures/json/spc.json (R: aov on a seeded balanced
 * session for the effects and SEs of methods §3.7b; Cochran's Q by formula in R) and the
 * ProofWiki Kendall's W example of methods §7.10 (W = 1/16, χ² = 0.5, p = 0.7788).
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import type { FitJson } from '../../../domain/analysis.js';
import { cochranQ, productRankConcordance, sessionProductEffects } from '../../../analysis/monitor/stability.js';
import type { SessionAttributeResult } from '../../../analysis/monitor/series.js';

interface EffectsFixture {
  nAssessors: number; nProducts: number; nReplicates: number; products: string[]; productMeans: number[]; msAP: number; msE: number; df: number;
  effectVsMean: number[]; seVsMean: number; ciLowVsMean: number[]; ciHighVsMean: number[];
  effectVsReference: number[]; seVsReference: number; ciLowVsReference: number[];
  cochran: { effect: number[]; se: number[]; pooledEffect: number; q: number; df: number; pValue: number; iSquared: number };
}
const fx = (JSON.parse(readFileSync(new URL('../../fixtures/json/spc.json', import.meta.url), 'utf8')) as { productEffects: EffectsFixture }).productEffects;

function resultWith(means: { product: string; mean: number }[], session = 'S1'): SessionAttributeResult {
  const fit: FitJson = {
    session,
    attribute: 'x',
    model: 'session',
    n: fx.nAssessors * fx.nProducts * fx.nReplicates,
    assessors: fx.nAssessors,
    products: means.length,
    // Balanced, non-boundary: REML = ANOVA, σ²_AP = (MS_AP − MS_E)/n, σ²_E = MS_E (methods §1.2–1.3).
    variance: { assessor: 0.2, 'assessor:product': (fx.msAP - fx.msE) / fx.nReplicates, residual: fx.msE },
    remlCriterion: 0,
    productTest: { F: null, numDf: 3, denDf: null, p: null },
    productMeans: means.map((m) => ({ ...m, se: 0.1 })),
    assessorEffects: [],
  };
  return { session, date: '2026-01-01', attribute: 'x', scaleMin: 0, scaleMax: 10, fit, indices: [], productTestP: 0.001 };
}

describe('session-wise product effects (methods §3.7b) against R aov', () => {
  const result = resultWith(fx.products.map((product, i) => ({ product, mean: fx.productMeans[i] })));
  it('deviation from the session mean, SE and 95 % CI', () => {
    const effects = sessionProductEffects(result, null);
    effects.forEach((e, i) => {
      expect(e.effect).toBeCloseTo(fx.effectVsMean[i], 10);
      expect(e.effectSe).toBeCloseTo(fx.seVsMean, 10);
      expect(e.df).toBe(fx.df);
      // jStat's t quantile differs from R's qt by ~3e-8 relative (observed), hence 6 decimals for CIs.
      expect(e.ciLow).toBeCloseTo(fx.ciLowVsMean[i], 6);
      expect(e.ciHigh).toBeCloseTo(fx.ciHighVsMean[i], 6);
    });
  });
  it('difference from the reference product', () => {
    const effects = sessionProductEffects(result, 'P1');
    expect(effects.map((e) => e.product)).toEqual(['P2', 'P3', 'P4']);
    effects.forEach((e, i) => {
      expect(e.effect).toBeCloseTo(fx.effectVsReference[i], 10);
      expect(e.effectSe).toBeCloseTo(fx.seVsReference, 10);
      expect(e.ciLow).toBeCloseTo(fx.ciLowVsReference[i], 6);
    });
    expect(sessionProductEffects(result, 'absent')).toEqual([]);
  });
});

describe("Cochran's Q and I²", () => {
  it('matches the R computation', () => {
    const q = cochranQ(fx.cochran.effect.map((effect, i) => ({ effect, effectSe: fx.cochran.se[i] })));
    expect(q?.pooledEffect).toBeCloseTo(fx.cochran.pooledEffect, 12);
    expect(q?.q).toBeCloseTo(fx.cochran.q, 10);
    expect(q?.df).toBe(fx.cochran.df);
    expect(q?.pValue).toBeCloseTo(fx.cochran.pValue, 10);
    expect(q?.iSquared).toBeCloseTo(fx.cochran.iSquared, 10);
  });
});

describe("Kendall's W of product ranks across sessions", () => {
  it('ProofWiki example: 4 sessions rank 3 products → W = 0.0625 (methods §7.10)', () => {
    // judges A–D rank competitors X, Y, Z: X = (1, 1, 2, 3), Y = (3, 2, 3, 1), Z = (2, 3, 1, 2)
    const ranks = [[1, 3, 2], [1, 2, 3], [2, 3, 1], [3, 1, 2]];
    const results = ranks.map((r, s) => resultWith([{ product: 'X', mean: r[0] }, { product: 'Y', mean: r[1] }, { product: 'Z', mean: r[2] }], `S${s + 1}`));
    const w = productRankConcordance(results);
    expect(w?.W).toBeCloseTo(0.0625, 12);
    expect(w?.chiSquare).toBeCloseTo(0.5, 12);
    expect(w?.pValue).toBeCloseTo(0.7788008, 6);
    expect(w?.products).toEqual(['X', 'Y', 'Z']);
  });
});
