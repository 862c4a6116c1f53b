/**
 * A monitored series: baseline per segment (segments restart at user events such as retraining
 * or a new control batch, methods notes §3.6), standardisation z = (x − μ̂0)/σ̂, then EWMA,
 * tabular CUSUM and the individuals chart with Western Electric rules on z.
 * Missing values are skipped: the chart index counts only non-missing values (methods §3.1).
 */
import { estimateBaseline, type Baseline, type BaselineOptions } from './baseline.js';
import { cusumChart, type CusumDesign } from './cusum.js';
import { ewmaChart, type EwmaDesign } from './ewma.js';
import { individualsChart, type WesternElectricRule } from './shewhart.js';

export interface SeriesPoint {
  session: string;
  date: string;
  /** The charted quantity for this session; null when it is not defined. */
  value: number | null;
}

export interface SegmentOptions {
  baseline?: BaselineOptions;
  /** Sessions at which a new baseline starts (the event takes effect from that session). */
  restartSessions?: readonly string[];
  /**
   * User-chosen reference period: the labels of its sessions. The segment holding most of the
   * period's values takes its baseline from them and is charted from the period's first value on
   * (earlier values of that segment are shown uncharted: they are not monitored against a baseline
   * that comes after them). Other segments use their first `fullValues` values.
   */
  referenceSessions?: ReadonlySet<string> | null;
  /**
   * Panel-pooled spread of comparable series: values are standardised with max(own σ̂, floor),
   * which removes the short-σ̂ tail that otherwise dominates false alarms (docs/methods.md).
   */
  spreadFloorSd?: number | null;
}

export type BaselineSource = 'first-values' | 'reference-period';

export interface StandardisedPoint {
  session: string;
  date: string;
  value: number;
  /** (value − centre)/spreadSd. */
  z: number;
}

export interface Segment {
  /** First session of the segment (the series start or a restart event). */
  startSession: string;
  baseline: Baseline;
  /** Where the baseline values came from: the segment's first values or the user's reference period. */
  baselineSource: BaselineSource;
  /** Non-missing points of the segment, standardised; empty when the baseline has no limits. */
  points: StandardisedPoint[];
  /** Non-missing points that were not standardised (no limits, or before the reference period). */
  unchartedPoints: SeriesPoint[];
  /** The spread the values were standardised with: max(baseline σ̂, spreadFloorSd); absent without limits. */
  spreadUsedSd?: number;
}

/** Splits at restart events, estimates each segment's baseline and standardises its values. */
export function standardiseSegments(series: readonly SeriesPoint[], options: SegmentOptions = {}): Segment[] {
  const restarts = new Set(options.restartSessions ?? []);
  const fullValues = options.baseline?.fullValues ?? 20;
  const pieces: SeriesPoint[][] = [];
  let current: SeriesPoint[] = [];
  for (const point of series) {
    if (restarts.has(point.session) && current.length > 0) {
      pieces.push(current);
      current = [];
    }
    current.push(point);
  }
  if (current.length > 0) pieces.push(current);
  const presentOf = (piece: SeriesPoint[]) => piece.filter((p): p is SeriesPoint & { value: number } => p.value !== null && Number.isFinite(p.value));
  const presentPieces = pieces.map(presentOf);
  const chosen = options.referenceSessions ?? null;
  // The segment holding most of the reference period's values (the first of equals) uses it.
  let referenceSegment = -1;
  if (chosen && chosen.size > 0) {
    let most = 0;
    presentPieces.forEach((present, i) => {
      const inside = present.reduce((n, p) => n + (chosen.has(p.session) ? 1 : 0), 0);
      if (inside > most) [most, referenceSegment] = [inside, i];
    });
  }
  return pieces.map((piece, i) => {
    const present = presentPieces[i];
    const fromReference = i === referenceSegment && chosen !== null;
    const firstInside = fromReference ? present.findIndex((p) => chosen.has(p.session)) : 0;
    const reference = fromReference ? present.filter((p) => chosen.has(p.session)) : present.slice(0, fullValues);
    const charted = present.slice(firstInside);
    const before = present.slice(0, firstInside);
    const baseline = estimateBaseline(reference.map((p) => p.value), options.baseline);
    const baselineSource: BaselineSource = fromReference ? 'reference-period' : 'first-values';
    if (baseline.centre === null || baseline.spreadSd === null) {
      return { startSession: piece[0].session, baseline, baselineSource, points: [], unchartedPoints: present };
    }
    const { centre } = baseline;
    const spreadSd = Math.max(baseline.spreadSd, options.spreadFloorSd ?? 0);
    return {
      startSession: piece[0].session,
      baseline,
      baselineSource,
      spreadUsedSd: spreadSd,
      points: charted.map((p) => ({ session: p.session, date: p.date, value: p.value, z: (p.value - centre) / spreadSd })),
      unchartedPoints: before,
    };
  });
}

export interface ChartDesigns {
  ewma: EwmaDesign;
  cusum: CusumDesign;
  rules: readonly WesternElectricRule[];
  /**
   * EWMA L for a segment with this many baseline values (and whether a spread floor applies),
   * instead of the fixed ewma.L: the limit the flag engine uses (analysis/monitor/chart-design.ts).
   */
  limitWidthFor?: (nReference: number, spreadFloorActive: boolean) => number;
  /**
   * The watch level's L for the same baseline (a wider false-alarm budget, so a narrower limit):
   * points between the watch and act limits are what the flag engine reports at watch.
   */
  watchLimitWidthFor?: (nReference: number, spreadFloorActive: boolean) => number;
}

export interface MonitoredPoint extends StandardisedPoint {
  ewma: number;
  ewmaLimit: number;
  /** The watch level's limit at this point, or null when the design has no watch level. */
  ewmaWatchLimit: number | null;
  cusumUpper: number;
  cusumLower: number;
  /** Western Electric rules that fired here. */
  rules: WesternElectricRule[];
  ewmaSignal: 'up' | 'down' | null;
  cusumSignal: 'up' | 'down' | null;
}

export interface MonitoredSegment {
  startSession: string;
  baseline: Baseline;
  baselineSource: BaselineSource;
  /** Values of the segment not charted (before the reference period, or no limits). */
  unchartedPoints: SeriesPoint[];
  points: MonitoredPoint[];
  /** First CUSUM signal with the estimated change point, or null. */
  cusumFirstSignal: { session: string; direction: 'up' | 'down'; changePointSession: string; estimatedNewMean: number } | null;
  ewmaFirstSignalSession: string | null;
  /** EWMA L used for this segment. */
  ewmaLimitWidth: number;
  /** The watch level's L for this segment, or null without one. */
  ewmaWatchLimitWidth: number | null;
  /** The spread the values were standardised with (see Segment). */
  spreadUsedSd?: number;
}

/** Full chart of a series (for display and for the flag engine): one entry per segment. */
export function monitorSeries(series: readonly SeriesPoint[], designs: ChartDesigns, options: SegmentOptions = {}): MonitoredSegment[] {
  return standardiseSegments(series, options).map((segment) => {
    const z = segment.points.map((p) => p.z);
    const floorActive = (options.spreadFloorSd ?? 0) > 0;
    const sized = segment.points.length > 0;
    const L = designs.limitWidthFor && sized ? designs.limitWidthFor(segment.baseline.nReference, floorActive) : designs.ewma.L;
    const watchL = designs.watchLimitWidthFor && sized ? designs.watchLimitWidthFor(segment.baseline.nReference, floorActive) : null;
    // Unit-width limits, scaled per level: the same products the flag engine compares with.
    const ewma = ewmaChart(z, { lambda: designs.ewma.lambda, L: 1 });
    const cusum = cusumChart(z, designs.cusum);
    const rules = individualsChart(z, designs.rules);
    let ewmaFirstSignalIndex: number | null = null;
    const points: MonitoredPoint[] = segment.points.map((p, i) => {
      const statistic = ewma.points[i].statistic;
      const limit = L * ewma.points[i].limit;
      const ewmaSignal = statistic > limit ? 'up' : statistic < -limit ? 'down' : null;
      if (ewmaSignal && ewmaFirstSignalIndex === null) ewmaFirstSignalIndex = i;
      return {
        session: p.session,
        date: p.date,
        value: p.value,
        z: p.z,
        ewma: statistic,
        ewmaLimit: limit,
        ewmaWatchLimit: watchL === null ? null : watchL * ewma.points[i].limit,
        cusumUpper: cusum.points[i].upper,
        cusumLower: cusum.points[i].lower,
        rules: rules[i].rules,
        ewmaSignal,
        cusumSignal: cusum.points[i].signal,
      };
    });
    const signal = cusum.firstSignal;
    const { centre } = segment.baseline;
    const spreadSd = segment.spreadUsedSd ?? segment.baseline.spreadSd;
    return {
      startSession: segment.startSession,
      baseline: segment.baseline,
      baselineSource: segment.baselineSource,
      unchartedPoints: segment.unchartedPoints,
      points,
      ewmaFirstSignalSession: ewmaFirstSignalIndex === null ? null : points[ewmaFirstSignalIndex].session,
      ewmaLimitWidth: L,
      ewmaWatchLimitWidth: watchL,
      ...(segment.spreadUsedSd !== undefined ? { spreadUsedSd: segment.spreadUsedSd } : {}),
      cusumFirstSignal:
        signal && centre !== null && spreadSd !== null
          ? {
              session: points[signal.index].session,
              direction: signal.direction,
              changePointSession: points[signal.changePointIndex].session,
              estimatedNewMean: centre + spreadSd * signal.estimatedShiftSd,
            }
          : null,
    };
  });
}

/**
 * Target in-control ARL for a set of K charts updated together each session, given a tolerated
 * number of false alarms per year across the set (methods §3.4: ARL0 ≈ K/f with f per session).
 */
export function targetArl0ForChartSet(nCharts: number, sessionsPerYear: number, falseAlarmsPerYear: number): number {
  return Math.max(1, nCharts) * sessionsPerYear / falseAlarmsPerYear;
}
