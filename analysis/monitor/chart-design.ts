/**
 * The one chart design of the level charts (docs/methods.md §3.11): the target
 * in-control ARL of a chart set, the EWMA limit width L for a segment's baseline, and the designs
 * the pages draw with. The flag engine (analysis/flags/drift-flags.ts) and the pages both take L
 * from chartLimitWidth, so a point drawn beyond an act limit is a point the flag engine saw.
 * L is sized for the false-alarm rate averaged over the baseline's estimation error
 * (analysis/monitor/unconditional.ts); the target is rounded to two significant digits so that
 * a caller's sizing memo (analysis/monitor/sizing-memo.ts) is reused across panels.
 */
import type { WesternElectricRule } from './shewhart.js';
import { targetArl0ForChartSet, type ChartDesigns } from './chart.js';
import { cusumIntervalForArl0 } from './cusum.js';
import { ewmaLimitForUnconditionalArl0 } from './unconditional.js';
import type { ChartSizingMemo } from './sizing-memo.js';

/** States of the CUSUM chain used to size h (fast; ARL0 within ~2 % of 400 states). */
export const CUSUM_SIZING_STATES = 61;

/** Targets for one chart set: ARL0 = K × sessions per year / tolerated false alarms per year (methods §3.4). */
export interface ChartSizing {
  lambda: number;
  k: number;
  actTargetArl0: number;
  watchTargetArl0: number;
  nCharts: number;
}

/** Target ARL0 rounded to two significant digits. */
export function roundTargetArl0(arl0: number): number {
  const magnitude = 10 ** (Math.floor(Math.log10(arl0)) - 1);
  return Math.round(arl0 / magnitude) * magnitude;
}

export function chartSizing(nCharts: number, sessionsPerYear: number, actFalseAlarmsPerYear: number, watchFalseAlarmsPerYear: number, lambda: number, k: number): ChartSizing {
  return {
    lambda,
    k,
    nCharts,
    actTargetArl0: roundTargetArl0(targetArl0ForChartSet(nCharts, sessionsPerYear, actFalseAlarmsPerYear)),
    watchTargetArl0: roundTargetArl0(targetArl0ForChartSet(nCharts, sessionsPerYear, watchFalseAlarmsPerYear)),
  };
}

/** EWMA L for a segment whose baseline has `nReference` values; `spreadFloorActive`: a panel-pooled spread floor applies. */
export function chartLimitWidth(lambda: number, targetArl0: number, nReference: number, spreadFloorActive: boolean, memo?: ChartSizingMemo): number {
  return ewmaLimitForUnconditionalArl0(lambda, roundTargetArl0(targetArl0), nReference, spreadFloorActive ? 1 : 0, memo);
}

/** CUSUM h for a target ARL0 (the chain sized with CUSUM_SIZING_STATES states). */
export function chartDecisionInterval(k: number, targetArl0: number, memo?: ChartSizingMemo): number {
  return cusumIntervalForArl0(k, targetArl0, CUSUM_SIZING_STATES, memo);
}

/** The one way an EWMA limit width is printed (pages, flag evidence text, chart titles). */
export function limitWidthText(limitWidth: number): string {
  return limitWidth.toFixed(3);
}

/**
 * The designs of a chart set, for the pages and the flag engine alike: the EWMA limit drawn is the
 * act level's L for each segment's baseline (chartLimitWidth), with the watch level's L beside it;
 * ewma.L is the act value for a full baseline of `fullBaselineValues` with a spread floor (the
 * usual case), for display where one number is printed. CUSUM h is sized for the watch target:
 * the CUSUM dates the start of a change the watch level sees (its estimate is the case's first
 * session), it does not raise cases itself.
 */
export function sizedChartDesigns(sizing: ChartSizing, fullBaselineValues: number, rules: readonly WesternElectricRule[], memo?: ChartSizingMemo): ChartDesigns {
  return {
    ewma: { lambda: sizing.lambda, L: chartLimitWidth(sizing.lambda, sizing.actTargetArl0, fullBaselineValues, true, memo) },
    cusum: { k: sizing.k, h: chartDecisionInterval(sizing.k, sizing.watchTargetArl0, memo) },
    rules,
    limitWidthFor: (nReference, spreadFloorActive) => chartLimitWidth(sizing.lambda, sizing.actTargetArl0, nReference, spreadFloorActive, memo),
    watchLimitWidthFor: (nReference, spreadFloorActive) => chartLimitWidth(sizing.lambda, sizing.watchTargetArl0, nReference, spreadFloorActive, memo),
  };
}
