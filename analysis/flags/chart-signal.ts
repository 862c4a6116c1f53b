/**
 * What a flag reads off one monitored chart (methods §3.1–3.5): the first act-level (else
 * watch-level) EWMA crossing of the chart's current segment, the Western Electric watch rules when
 * asked, and the CUSUM estimate of where the change began. The chart itself comes from the one
 * chart design (analysis/monitor/chart-design.ts, monitorSeries), the same the pages draw, so a
 * crossing of the drawn act limit is the crossing the flag reports.
 */
import type { FlagSeverity } from '../../domain/flags.js';
import { monitorSeries, standardiseSegments, type BaselineSource, type MonitoredSegment, type SegmentOptions, type SeriesPoint } from '../monitor/chart.js';
import { limitWidthText, sizedChartDesigns, type ChartSizing } from '../monitor/chart-design.js';
import { median } from '../monitor/series.js';
import type { ChartSizingMemo } from '../monitor/sizing-memo.js';

/** Western Electric rules that give watch flags (rule 1 alone is drawn for reading only). */
export const WATCH_RULES = [2, 3, 4] as const;

export interface ChartSignal {
  severity: FlagSeverity;
  direction: 'up' | 'down';
  chart: 'EWMA' | 'Western Electric';
  signalSession: string;
  /** Estimated start of the change (tabular CUSUM estimate t − N + 1), else the signal session. */
  changeSession: string;
  statistic: number;
  limit: number;
  /** EWMA limit width L used at the reported level. */
  limitWidth: number;
  targetArl0: number;
  rules?: number[];
  baseline: {
    centre: number;
    spreadSd: number;
    nReference: number;
    provisional: boolean;
    startSession: string;
    pooledSpreadFloorSd: number | null;
    /** 'reference-period' when the user's reference period gave the baseline values. */
    source: BaselineSource;
    /** First charted session (the segment start, or the reference period's first value). */
    chartedFromSession: string;
  };
  /** Mean of the last (up to) four values minus the centre, in series units. */
  recentShift: number;
  nPoints: number;
}

/** The current (last) segment's baseline spread, or null. */
export function currentSpread(series: readonly SeriesPoint[], options: SegmentOptions): number | null {
  const segments = standardiseSegments(series, options);
  return segments[segments.length - 1]?.baseline.spreadSd ?? null;
}

/** Median of the defined values, or null when fewer than 3 (too few to pool). */
export function pooledSpread(spreads: readonly (number | null)[]): number | null {
  const defined = spreads.filter((v): v is number => v !== null && v > 0);
  return defined.length >= 3 ? median(defined) : null;
}

/**
 * First act-level (else watch-level) EWMA signal in the series' current segment, or null.
 * Limits: exact EWMA limits with L sized for the unconditional ARL0 over the baseline's estimation
 * error (analysis/monitor/unconditional.ts). With `spreadFloorSd` (a panel-pooled spread of
 * comparable series) the spread used is max(own σ̂, floor), which removes the short-σ̂ tail that
 * otherwise dominates false alarms. The tabular CUSUM supplies the change-point estimate.
 */
export function evaluateChart(
  series: readonly SeriesPoint[],
  options: SegmentOptions,
  sizing: ChartSizing,
  westernElectric: boolean,
  /** Act also needs |recent shift| ≥ this (series units); smaller shifts are reported as watch. */
  minimumActShift = 0,
  spreadFloorSd: number | null = null,
  memo?: ChartSizingMemo,
): ChartSignal | null {
  const designs = sizedChartDesigns(sizing, options.baseline?.fullValues ?? 20, westernElectric ? WATCH_RULES : [], memo);
  const segments = monitorSeries(series, designs, { ...options, spreadFloorSd });
  return signalOfSegment(segments[segments.length - 1], sizing, westernElectric, minimumActShift, spreadFloorSd);
}

/** The flag's reading of a chart's current segment (see evaluateChart). */
export function signalOfSegment(
  segment: MonitoredSegment | undefined,
  sizing: ChartSizing,
  westernElectric: boolean,
  minimumActShift: number,
  spreadFloorSd: number | null,
): ChartSignal | null {
  if (!segment || segment.points.length === 0 || segment.baseline.centre === null || segment.spreadUsedSd === undefined) return null;
  const centre = segment.baseline.centre;
  const provisional = segment.baseline.status === 'provisional';
  const recent = segment.points.slice(-4);
  const recentShift = recent.reduce((s, p) => s + p.value, 0) / recent.length - centre;
  const baseline = {
    centre,
    spreadSd: segment.spreadUsedSd,
    nReference: segment.baseline.nReference,
    provisional,
    startSession: segment.startSession,
    pooledSpreadFloorSd: spreadFloorSd,
    source: segment.baselineSource,
    chartedFromSession: segment.points[0].session,
  };
  const nPoints = segment.points.length;
  const levels = [
    { level: 'act', targetArl0: sizing.actTargetArl0, limitWidth: segment.ewmaLimitWidth, limitAt: (i: number) => segment.points[i].ewmaLimit },
    { level: 'watch', targetArl0: sizing.watchTargetArl0, limitWidth: segment.ewmaWatchLimitWidth, limitAt: (i: number) => segment.points[i].ewmaWatchLimit },
  ] as const;
  for (const { level, targetArl0, limitWidth, limitAt } of levels) {
    if (limitWidth === null) continue;
    const t = segment.points.findIndex((p, i) => Math.abs(p.ewma) > (limitAt(i) as number));
    if (t < 0) continue;
    const point = segment.points[t];
    return {
      severity: level === 'act' && !provisional && Math.abs(recentShift) >= minimumActShift ? 'act' : 'watch',
      chart: 'EWMA',
      direction: point.ewma > 0 ? 'up' : 'down',
      statistic: point.ewma,
      limit: limitAt(t) as number,
      limitWidth,
      targetArl0,
      signalSession: point.session,
      changeSession: segment.cusumFirstSignal?.changePointSession ?? point.session,
      baseline,
      recentShift,
      nPoints,
    };
  }
  if (westernElectric) {
    const t = segment.points.findIndex((p) => p.rules.some((r) => r !== 1));
    if (t >= 0) {
      const point = segment.points[t];
      return {
        severity: 'watch',
        chart: 'Western Electric',
        direction: point.z > 0 ? 'up' : 'down',
        statistic: point.z,
        limit: 0,
        limitWidth: 0,
        targetArl0: 0,
        rules: point.rules.filter((r) => r !== 1),
        signalSession: point.session,
        changeSession: point.session,
        baseline,
        recentShift,
        nPoints,
      };
    }
  }
  return null;
}

export function thresholdText(signal: ChartSignal, sizing: ChartSizing, setName: string): string {
  if (signal.chart === 'Western Electric') return `Western Electric rule ${signal.rules?.join(', ')} (watch only)`;
  const provisional = signal.baseline.provisional ? '; baseline provisional, so watch at most' : '';
  const guard = signal.severity === 'act' ? '; act also needs a recent shift of at least the lenient/harsh watch offset' : '';
  return `EWMA (λ = ${sizing.lambda}) limit L = ${limitWidthText(signal.limitWidth)}, sized for an in-control ARL of ${signal.targetArl0} sessions averaged over the baseline's estimation error, across ${sizing.nCharts} ${setName}${provisional}${guard}`;
}
