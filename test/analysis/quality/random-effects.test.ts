/**
 * The swap check's pooling of an assessor's slopes (analysis/quality/random-effects.ts) against
 * metafor 3.8 (R): rma(method = "DL") for the random-effects mean, its SE, the between-session
 * variance τ² and the prediction SE √(SE² + τ²) of predict(); rma(method = "FE") for the
 * inverse-variance combination of two estimates. Values from test/fixtures/r/random-effects.R.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { inverseVarianceCombination, randomEffectsPrediction } from '../../../analysis/quality/random-effects.js';

interface Fixture {
  randomEffects: { name: string; slopes: number[]; variances: number[]; tau2: number; estimate: number; se: number; predictionSe: number }[];
  fixedEffect: { a: number; varianceA: number; b: number; varianceB: number; estimate: number; variance: number }[];
}
const fixture = JSON.parse(readFileSync(new URL('../../fixtures/json/random-effects.json', import.meta.url), 'utf8')) as Fixture;

describe('random-effects prediction (DerSimonian-Laird) against metafor', () => {
  for (const set of fixture.randomEffects) {
    it(set.name, () => {
      const got = randomEffectsPrediction(set.slopes.map((value, k) => ({ value, variance: set.variances[k] })))!;
      expect(got.between).toBeCloseTo(set.tau2, 12);
      expect(got.mean).toBeCloseTo(set.estimate, 12);
      expect(Math.sqrt(got.meanVariance)).toBeCloseTo(set.se, 12);
      expect(Math.sqrt(got.predictionVariance)).toBeCloseTo(set.predictionSe, 10);
    });
  }
  it('needs two estimates of positive variance', () => {
    expect(randomEffectsPrediction([{ value: 1, variance: 0.01 }])).toBeNull();
    expect(randomEffectsPrediction([{ value: 1, variance: 0.01 }, { value: 2, variance: 0 }])).toBeNull();
  });
});

describe('inverse-variance combination against metafor (fixed effect)', () => {
  for (const pair of fixture.fixedEffect) {
    it(`${pair.a} (variance ${pair.varianceA}) with ${pair.b} (variance ${pair.varianceB})`, () => {
      const got = inverseVarianceCombination({ value: pair.a, variance: pair.varianceA }, { value: pair.b, variance: pair.varianceB });
      expect(got.value).toBeCloseTo(pair.estimate, 12);
      expect(got.variance).toBeCloseTo(pair.variance, 12);
    });
  }
});
