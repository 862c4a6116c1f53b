/**
 * Data-quality checks (methods §5, common practice rules) on seeded synthetic sessions with planted
 * problems. The §7.12 check values are on GPL data (TVbo), so the swap check is tested on our own
 * data instead, with the expected outcome documented beside each case.
 */
import { describe, expect, it } from 'vitest';
import {
  checkClipping,
  checkInRangeDecimalShift,
  checkMissingCells,
  checkStraightLining,
  detectSwappedCodes,
  interactionMeanSquare,
  resolutionOf,
  sessionData,
} from '../../../analysis/quality/index.js';
import { attributesOf, swapProducts, syntheticRatings } from '../flags/helpers/synthetic-ratings.js';

const allDiscriminate = (n: number) => new Map(attributesOf(n).map((a) => [a.name, 1e-6 as number | null]));
const SWAP_OPTIONS = { minRelativeGain: 0.3, minAttributes: 5, falseAlertsPerYear: 0.05, sessionsPerYear: 52 };

describe('swapped sample codes (methods §5.10)', () => {
  it('no swap found in unmodified sessions (5 seeds × 8 assessors × 2 replicates)', () => {
    for (const seed of [1, 2, 3, 4, 5]) {
      const data = sessionData('S01', syntheticRatings({ seed }), attributesOf(8));
      expect(detectSwappedCodes(data, allDiscriminate(8), SWAP_OPTIONS)).toEqual([]);
    }
  });
  it('a planted exchange of P1 and P4 for A03, replicate 1, is found for exactly that pair', () => {
    // Expected: one finding (A03, replicate 1, P1 ↔ P4) with a large relative gain, because the
    // product profiles differ by several points on 8 attributes while noise is ~0.6 points.
    const ratings = swapProducts(syntheticRatings({ seed: 2 }), 'A03', 1, 'P1', 'P4');
    const findings = detectSwappedCodes(sessionData('S01', ratings, attributesOf(8)), allDiscriminate(8), SWAP_OPTIONS);
    expect(findings).toHaveLength(1);
    expect(findings[0]).toMatchObject({ assessor: 'A03', replicate: 1, productA: 'P1', productB: 'P4' });
    expect(findings[0].relativeGain).toBeGreaterThan(0.5);
    expect(findings[0].codes.every((c) => typeof c === 'string')).toBe(true);
  });
  it('an exchange of two near-identical products is not found (documented limitation)', () => {
    const profiles = [0, 1, 2, 3, 4, 5].map((p) => Array.from({ length: 8 }, (_, j) => 2 + ((p * 3 + j * 5) % 7)));
    profiles[5] = profiles[4].map((v) => v + 0.05);
    const ratings = swapProducts(syntheticRatings({ seed: 3, profiles }), 'A02', 2, 'P5', 'P6');
    const findings = detectSwappedCodes(sessionData('S01', ratings, attributesOf(8)), allDiscriminate(8), SWAP_OPTIONS);
    expect(findings.filter((f) => f.assessor === 'A02')).toEqual([]);
  });
  it('needs enough discriminating attributes', () => {
    const ratings = swapProducts(syntheticRatings({ seed: 2 }), 'A03', 1, 'P1', 'P4');
    const none = new Map(attributesOf(8).map((a) => [a.name, 0.5 as number | null]));
    expect(detectSwappedCodes(sessionData('S01', ratings, attributesOf(8)), none, SWAP_OPTIONS)).toEqual([]);
  });
});

describe('interaction mean square', () => {
  it('equals the two-way ANOVA MS_AP on a hand-computed 2 × 2 balanced table', () => {
    // cell means: A1: (1, 3), A2: (2, 6), one replicate → residuals ±0.5, SS = 4·0.25 = 1, df 1.
    const ratings = [
      ['A1', 'P1', 1], ['A1', 'P2', 3], ['A2', 'P1', 2], ['A2', 'P2', 6],
    ].map(([assessor, product, value]) => ({ session: 'S', date: '2026-01-01', assessor: assessor as string, product: product as string, replicate: 1, attribute: 'x', value: value as number, code: null }));
    expect(interactionMeanSquare(sessionData('S', ratings, [{ name: 'x', scaleMin: 0, scaleMax: 10 }]), 'x')).toBeCloseTo(1, 12);
  });
});

describe('straight-lining (methods §5.6)', () => {
  it('flat ratings on 5 of 8 attributes give act findings and a session-level act', () => {
    const ratings = syntheticRatings({ seed: 4 }).map((r) => (r.assessor === 'A05' && Number(r.attribute.slice(4)) <= 5 ? { ...r, value: 5 } : r));
    const { findings, summaries } = checkStraightLining(sessionData('S01', ratings, attributesOf(8)), allDiscriminate(8), { watchRatio: 0.2, actShare: 0.5 });
    expect(findings.filter((f) => f.assessor === 'A05' && f.severity === 'act').map((f) => f.attribute)).toEqual(['attr1', 'attr2', 'attr3', 'attr4', 'attr5']);
    expect(summaries.find((s) => s.assessor === 'A05')?.sessionAct).toBe(true);
    expect(findings.filter((f) => f.assessor !== 'A05')).toEqual([]);
  });
  it('resolution is the smallest step, floored at R/1000', () => {
    expect(resolutionOf([1, 1.5, 2.5], 10)).toBeCloseTo(0.5, 12);
    expect(resolutionOf([1, 1, 1], 10)).toBeCloseTo(0.01, 12);
  });
});

describe('scale-end clipping (methods §5.7)', () => {
  it('an assessor with most ratings at the scale ends is act; clean data give nothing', () => {
    const clean = syntheticRatings({ seed: 6 });
    const opts = { zoneFraction: 0.02, watchFraction: 0.25, watchMultiple: 2, actFraction: 0.5 };
    expect(checkClipping(sessionData('S01', clean, attributesOf(8)), opts)).toEqual([]);
    const clipped = clean.map((r) => (r.assessor === 'A01' ? { ...r, value: r.value >= 5 ? 10 : 0 } : r));
    const findings = checkClipping(sessionData('S01', clipped, attributesOf(8)), opts);
    expect(findings).toHaveLength(1);
    expect(findings[0]).toMatchObject({ assessor: 'A01', severity: 'act', endShare: 1 });
  });
});

describe('missing cells (methods §5.5)', () => {
  it('completeness below 0.9 is watch, below 0.5 act; complete assessors are not listed', () => {
    const ratings = syntheticRatings({ seed: 7 }).filter((r, i) => !(r.assessor === 'A02' && i % 5 === 0) && !(r.assessor === 'A04' && r.product !== 'P1' && r.product !== 'P2'));
    const findings = checkMissingCells(sessionData('S01', ratings, attributesOf(8)), { watchCompleteness: 0.9, actCompleteness: 0.5 });
    expect(findings.map((f) => [f.assessor, f.severity])).toEqual([['A02', 'watch'], ['A04', 'act']]);
    expect(findings[1].completeness).toBeCloseTo(2 / 6, 12);
  });
});

describe('in-range decimal shift on wide scales (methods §5.3b)', () => {
  it('a value a tenth of the panel median on a 0–100 scale is found with the suggested value', () => {
    const ratings = syntheticRatings({ seed: 8, scaleMax: 100 });
    const same = (r: (typeof ratings)[number]) => r.product === 'P3' && r.attribute === 'attr2';
    const others = ratings.filter((r) => same(r) && r.assessor !== 'A06').map((r) => r.value).sort((a, b) => a - b);
    const otherMedian = (others[others.length / 2 - 1] + others[others.length / 2]) / 2;
    const target = ratings.findIndex((r) => r.assessor === 'A06' && same(r) && r.replicate === 1);
    const original = Math.round(otherMedian);
    // e.g. 65 typed as 6.5: far below the others (> 3.5 robust SDs), and ×10 matches their median.
    ratings[target] = { ...ratings[target], value: original / 10 };
    const findings = checkInRangeDecimalShift(sessionData('S01', ratings, attributesOf(8, 100)), { minRange: 50, robustZ: 3.5 });
    expect(findings).toHaveLength(1);
    expect(findings[0]).toMatchObject({ assessor: 'A06', product: 'P3', attribute: 'attr2' });
    expect(findings[0].suggestedValue).toBeCloseTo(Math.round(original), 10);
  });
  it('is not applied to narrow scales and finds nothing in clean wide data', () => {
    expect(checkInRangeDecimalShift(sessionData('S01', syntheticRatings({ seed: 9, scaleMax: 100 }), attributesOf(8, 100)), { minRange: 50, robustZ: 3.5 })).toEqual([]);
    expect(checkInRangeDecimalShift(sessionData('S01', syntheticRatings({ seed: 9 }), attributesOf(8)), { minRange: 50, robustZ: 3.5 })).toEqual([]);
  });
});
