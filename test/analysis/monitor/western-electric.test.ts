/**
 * Western Electric rules 1–4: in-control ARL by seeded simulation against the published
 * ARL0 ≈ 91.75 of Champ & Woodall (1987) [REC for the value; methods §7.8 reproduces 91.73 ± 0.06
 * by a 2·10⁶-run simulation in R] and the exact 1/(2Φ(−3)) = 370.40 for rule 1 alone.
 * Tolerance: 3 standard errors of the simulated mean (SE computed from the runs themselves).
 */
import { describe, expect, it } from 'vitest';
import { createRuleState, individualsChart, updateRules, type WesternElectricRule } from '../../../analysis/monitor/shewhart.js';
import { seededRandom } from '../flags/helpers/random.js';

function simulateArl(nRuns: number, rules: WesternElectricRule[], seed: number): { mean: number; se: number } {
  const random = seededRandom(seed);
  let sum = 0;
  let sumSquares = 0;
  for (let run = 0; run < nRuns; run++) {
    const state = createRuleState();
    let t = 0;
    for (;;) {
      t++;
      if (updateRules(state, random.normal(), rules).length > 0) break;
    }
    sum += t;
    sumSquares += t * t;
  }
  const mean = sum / nRuns;
  const variance = (sumSquares - nRuns * mean * mean) / (nRuns - 1);
  return { mean, se: Math.sqrt(variance / nRuns) };
}

describe('Western Electric rules', () => {
  it('rules 1–4 together: in-control ARL within 3 SE of 91.75 (60 000 seeded runs)', () => {
    const { mean, se } = simulateArl(60_000, [1, 2, 3, 4], 20260402);
    expect(se).toBeLessThan(0.5);
    expect(Math.abs(mean - 91.75)).toBeLessThan(3 * se);
  });
  it('rule 1 alone: in-control ARL within 3 SE of 1/(2Φ(−3)) = 370.40 (15 000 seeded runs)', () => {
    const { mean, se } = simulateArl(15_000, [1], 7);
    expect(Math.abs(mean - 370.4) / se).toBeLessThan(3);
  });
  it('reports which rule fired', () => {
    // rule 2: two of three beyond 2 (same side); rule 3: four of five beyond 1; rule 4: eight above 0.
    expect(individualsChart([0.1, 2.5, 0.3, 2.2]).map((p) => p.rules)).toEqual([[], [], [], [2]]);
    expect(individualsChart([1.5, 1.2, 0.2, 1.1, 1.3]).at(-1)?.rules).toEqual([3]);
    expect(individualsChart([0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8]).at(-1)?.rules).toEqual([4]);
    expect(individualsChart([-3.2]).at(-1)?.rules).toEqual([1]);
    // a value exactly on the centre line breaks the run
    expect(individualsChart([0.1, 0.2, 0.3, 0, 0.5, 0.6, 0.7, 0.8]).at(-1)?.rules).toEqual([]);
    // opposite sides never combine
    expect(individualsChart([2.5, -2.5, 0]).at(-1)?.rules).toEqual([]);
  });
});
