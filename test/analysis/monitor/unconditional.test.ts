/**
 * Unconditional EWMA sizing (analysis/monitor/unconditional.ts) against a seeded Monte-Carlo
 * simulation of the whole procedure: a baseline of N values estimates μ and σ (mean, MR̄/1.128),
 * the chart then runs on new in-control values (restarted after each signal, asymptotic limits as
 * in the Markov chain) and the false-alarm rate per point is compared with 1/targetArl0.
 * Tolerance: 3 simulation standard errors (between-chart spread) plus 10 % for the grid and
 * quadrature approximations (observed differences are reported by the assertion message).
 */
import { describe, expect, it } from 'vitest';
import { movingRangeDf, unconditionalFalseAlarmRate, ewmaLimitForUnconditionalArl0 } from '../../../analysis/monitor/unconditional.js';
import { ewmaLimitForArl0 } from '../../../analysis/monitor/ewma.js';
import { seededRandom } from '../flags/helpers/random.js';

function simulatedRate(L: number, lambda: number, nReference: number, floor: boolean, seed: number): { rate: number; se: number } {
  const random = seededRandom(seed);
  const nCharts = 3000;
  const nPoints = 400;
  const limit = L * Math.sqrt(lambda / (2 - lambda));
  const rates: number[] = [];
  for (let c = 0; c < nCharts; c++) {
    const reference = Array.from({ length: nReference }, () => random.normal());
    const centre = reference.reduce((s, v) => s + v, 0) / nReference;
    let mr = 0;
    for (let i = 1; i < nReference; i++) mr += Math.abs(reference[i] - reference[i - 1]);
    let spread = mr / (nReference - 1) / 1.128;
    if (floor) spread = Math.max(spread, 1); // a precise pooled spread equal to the true σ
    let w = 0;
    let signals = 0;
    for (let t = 0; t < nPoints; t++) {
      w = lambda * ((random.normal() - centre) / spread) + (1 - lambda) * w;
      if (Math.abs(w) > limit) {
        signals++;
        w = 0;
      }
    }
    rates.push(signals / nPoints);
  }
  const rate = rates.reduce((s, v) => s + v, 0) / nCharts;
  const sd = Math.sqrt(rates.reduce((s, v) => s + (v - rate) ** 2, 0) / (nCharts - 1));
  return { rate, se: sd / Math.sqrt(nCharts) };
}

describe('EWMA limits sized over the baseline estimation error', () => {
  it('the moving-range df approximation is 0.62 (N − 1)', () => {
    expect(movingRangeDf(20)).toBeCloseTo(11.78, 10);
  });
  for (const { nReference, floor, target } of [
    { nReference: 20, floor: false, target: 200 },
    { nReference: 12, floor: false, target: 100 },
    { nReference: 20, floor: true, target: 300 },
  ]) {
    it(`N = ${nReference}${floor ? ', pooled spread floor' : ''}: simulated false-alarm rate ≈ 1/${target}`, () => {
      const L = ewmaLimitForUnconditionalArl0(0.2, target, nReference, floor ? 1 : 0);
      const { rate, se } = simulatedRate(L, 0.2, nReference, floor, 1000 + nReference);
      const expected = 1 / target;
      expect(Math.abs(rate - expected), `L = ${L.toFixed(3)}, simulated ${rate.toFixed(5)} ± ${se.toFixed(5)}, expected ${expected.toFixed(5)}`).toBeLessThan(3 * se + 0.1 * expected);
    });
  }
  it('with a huge baseline the limit tends to the conditional one', () => {
    expect(Math.abs(ewmaLimitForUnconditionalArl0(0.2, 500, 5000) - ewmaLimitForArl0(0.2, 500))).toBeLessThan(0.03);
  });
  it('nominal conditional limits would give several times the target rate with N = 20', () => {
    const conditional = ewmaLimitForArl0(0.2, 1000);
    expect(unconditionalFalseAlarmRate(0.2, conditional, 20) * 1000).toBeGreaterThan(2);
  });
});
