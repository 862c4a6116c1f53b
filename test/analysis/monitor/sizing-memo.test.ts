/**
 * The chart sizings keep nothing between calls themselves: a caller's memo only saves time. The
 * same limit widths, decision intervals and jump rules come back without a memo, with a fresh one
 * and with one filled by earlier calls (checked value for value: the memo must not round or mix keys).
 */
import { describe, expect, it } from 'vitest';
import { chartDecisionInterval, chartLimitWidth } from '../../../analysis/monitor/chart-design.js';
import { ewmaLimitForArl0 } from '../../../analysis/monitor/ewma.js';
import { jumpRule } from '../../../analysis/monitor/jump.js';
import { createChartSizingMemo } from '../../../analysis/monitor/sizing-memo.js';
import { unconditionalFalseAlarmRate } from '../../../analysis/monitor/unconditional.js';

describe('chart sizing memo', () => {
  it('a fresh memo, a used memo and no memo give the same numbers', () => {
    const used = createChartSizingMemo();
    // Fill the used memo with neighbouring keys first, so a key mix-up would show.
    for (const n of [8, 12, 20]) for (const floor of [true, false]) chartLimitWidth(0.2, 4800, n, floor, used);
    chartLimitWidth(0.1, 4800, 20, true, used);
    for (const [lambda, target, n, floor] of [[0.2, 4800, 12, true], [0.2, 480, 20, false], [0.1, 4800, 20, true], [0.3, 1000, 9, false]] as const) {
      const none = chartLimitWidth(lambda, target, n, floor);
      expect(chartLimitWidth(lambda, target, n, floor, createChartSizingMemo())).toBe(none);
      expect(chartLimitWidth(lambda, target, n, floor, used)).toBe(none);
      expect(unconditionalFalseAlarmRate(lambda, 3, n, floor ? 1 : 0, used)).toBe(unconditionalFalseAlarmRate(lambda, 3, n, floor ? 1 : 0));
    }
    expect(chartDecisionInterval(0.5, 4800, used)).toBe(chartDecisionInterval(0.5, 4800));
    expect(chartDecisionInterval(0.5, 480, used)).toBe(chartDecisionInterval(0.5, 480, createChartSizingMemo()));
    expect(ewmaLimitForArl0(0.2, 500, 101, used)).toBe(ewmaLimitForArl0(0.2, 500, 101));
    expect(jumpRule(10, 1e-4, undefined, used)).toEqual(jumpRule(10, 1e-4));
    expect(jumpRule(3, 1e-4, undefined, used)).toEqual(jumpRule(3, 1e-4, undefined, createChartSizingMemo()));
    expect(used.unconditionalLimits.size).toBeGreaterThan(4);
  });
});
