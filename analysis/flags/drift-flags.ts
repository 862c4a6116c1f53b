/**
 * Drift: a change in an assessor's level relative to their own baseline (methods §3.1–3.5).
 * Charts: EWMA (exact limits) and two-sided tabular CUSUM on the standardised level-offset series,
 * per assessor (summary = median over attributes of per-attribute z, itself baselined) and per
 * assessor × attribute. Limits are sized for the number of charts K in each set so that the set
 * gives about `actFalseAlarmsPerYear` (resp. watch) false signals per year: ARL0 = K·sessions/budget
 * (methods §3.4). Act signals are downgraded to watch while the baseline is provisional (§6.3).
 */
import type { Flag, FlagSeverity } from '../../domain/flags.js';
import { standardiseSegments, targetArl0ForChartSet, type SegmentOptions, type SeriesPoint } from '../monitor/chart.js';
import { cusumChart, cusumIntervalForArl0 } from '../monitor/cusum.js';
import { ewmaChart, ewmaLimitForArl0 } from '../monitor/ewma.js';
import { individualsChart } from '../monitor/shewhart.js';
import { buildAssessorSeries, restartSessionsFor, summarySeries } from '../monitor/series.js';
import type { FlagContext } from './context.js';
import { points, sessionsText } from './format.js';

/** States of the Markov chains used for sizing inside buildFlags: 101 keeps sizing fast; L differs from 301 states by < 0.1 % (checked in the tests). */
const SIZING_STATES = 101;

export interface ChartLimits {
  ewmaL: number;
  cusumH: number;
  targetArl0: number;
}

/** Target ARL0 rounded to two significant digits so that the memoised sizing is reused across panels. */
function roundTarget(arl0: number): number {
  const magnitude = 10 ** (Math.floor(Math.log10(arl0)) - 1);
  return Math.round(arl0 / magnitude) * magnitude;
}

export function sizedLimits(nCharts: number, sessionsPerYear: number, falseAlarmsPerYear: number, lambda: number, k: number): ChartLimits {
  const targetArl0 = roundTarget(targetArl0ForChartSet(nCharts, sessionsPerYear, falseAlarmsPerYear));
  return {
    ewmaL: ewmaLimitForArl0(lambda, targetArl0, SIZING_STATES),
    cusumH: cusumIntervalForArl0(k, targetArl0, SIZING_STATES),
    targetArl0,
  };
}

export interface ChartSignal {
  severity: FlagSeverity;
  direction: 'up' | 'down';
  chart: 'EWMA' | 'CUSUM' | 'Western Electric';
  signalSession: string;
  /** Estimated start of the change (CUSUM estimate t − N + 1), else the signal session. */
  changeSession: string;
  statistic: number;
  limit: number;
  rules?: number[];
  baseline: { centre: number; spreadSd: number; nReference: number; provisional: boolean; startSession: string };
  /** Mean of the last (up to) four values minus the centre, in series units. */
  recentShift: number;
  nPoints: number;
  limits: { act: ChartLimits; watch: ChartLimits };
}

/** First act-level (else watch-level) signal in the series' current segment, or null. */
export function evaluateChart(
  series: readonly SeriesPoint[],
  options: SegmentOptions,
  limits: { act: ChartLimits; watch: ChartLimits },
  lambda: number,
  k: number,
  westernElectric: boolean,
  /** Act also needs |recent shift| ≥ this (series units); smaller shifts are reported as watch. */
  minimumActShift = 0,
): ChartSignal | null {
  const segments = standardiseSegments(series, options);
  const segment = segments[segments.length - 1];
  if (!segment || segment.points.length === 0 || segment.baseline.centre === null || segment.baseline.spreadSd === null) return null;
  const z = segment.points.map((p) => p.z);
  const ewma = ewmaChart(z, { lambda, L: 1 });
  // The estimated centre is off by about σ/√N for the whole segment, a persistent shift that the
  // nominal limits ignore; widening the EWMA variance by 1/N (and the CUSUM by the same factor)
  // keeps the false-alarm rate near the sized one with a 20-value baseline (ours; see Jensen et al.
  // 2006 for the size of the effect). Checked by simulation in the tests.
  const centreVariance = 1 / segment.baseline.nReference;
  // The tabular CUSUM has no such simple correction (the centre error accumulates at every step):
  // in a simulation of 4000 clean 52-session series with a 20-value baseline it gave ~50 times
  // the sized false-alarm rate, so it supplies the change-point estimate and the display only.
  const useCusumSignals = false;
  const cusum = cusumChart(z, { k, h: Infinity });
  const provisional = segment.baseline.status === 'provisional';
  const recent = segment.points.slice(-4);
  const recentShift = recent.reduce((s, p) => s + p.value, 0) / recent.length - segment.baseline.centre;
  const baseline = {
    centre: segment.baseline.centre,
    spreadSd: segment.baseline.spreadSd,
    nReference: segment.baseline.nReference,
    provisional,
    startSession: segment.startSession,
  };
  const cusumChangePoint = (hLimit: number): string | null => {
    for (let t = 0; t < z.length; t++) {
      const p = cusum.points[t];
      if (p.upper > hLimit) return segment.points[t - p.nUpper + 1].session;
      if (p.lower > hLimit) return segment.points[t - p.nLower + 1].session;
    }
    return null;
  };
  for (const level of ['act', 'watch'] as const) {
    const { ewmaL, cusumH } = limits[level];
    for (let t = 0; t < z.length; t++) {
      const e = ewma.points[t];
      const c = cusum.points[t];
      let found: Pick<ChartSignal, 'chart' | 'direction' | 'statistic' | 'limit'> | null = null;
      const ewmaLimit = ewmaL * Math.sqrt(e.limit * e.limit + centreVariance);
      if (Math.abs(e.statistic) > ewmaLimit) found = { chart: 'EWMA', direction: e.statistic > 0 ? 'up' : 'down', statistic: e.statistic, limit: ewmaLimit };
      else if (useCusumSignals && c.upper > cusumH) found = { chart: 'CUSUM', direction: 'up', statistic: c.upper, limit: cusumH };
      else if (useCusumSignals && c.lower > cusumH) found = { chart: 'CUSUM', direction: 'down', statistic: c.lower, limit: cusumH };
      if (!found) continue;
      const severity: FlagSeverity = level === 'act' && !provisional && Math.abs(recentShift) >= minimumActShift ? 'act' : 'watch';
      const changeSession = cusumChangePoint(limits.watch.cusumH) ?? segment.points[t].session;
      return { ...found, severity, signalSession: segment.points[t].session, changeSession, baseline, recentShift, nPoints: z.length, limits };
    }
  }
  if (westernElectric) {
    const chart = individualsChart(z, [2, 3, 4]);
    const t = chart.findIndex((p) => p.rules.length > 0);
    if (t >= 0) {
      return {
        severity: 'watch',
        chart: 'Western Electric',
        direction: z[t] > 0 ? 'up' : 'down',
        statistic: z[t],
        limit: 0,
        rules: chart[t].rules,
        signalSession: segment.points[t].session,
        changeSession: segment.points[t].session,
        baseline,
        recentShift,
        nPoints: z.length,
        limits,
      };
    }
  }
  return null;
}

export function driftFlags(ctx: FlagContext): Flag[] {
  const c = ctx.settings.charts;
  const nAssessors = ctx.assessors.length;
  const nAttributes = ctx.history.attributes.length;
  if (nAssessors === 0 || nAttributes === 0) return [];
  const summaryLimits = {
    act: sizedLimits(nAssessors, c.sessionsPerYear, c.actFalseAlarmsPerYear, c.ewmaLambda, c.cusumK),
    watch: sizedLimits(nAssessors, c.sessionsPerYear, c.watchFalseAlarmsPerYear, c.ewmaLambda, c.cusumK),
  };
  const attributeLimits = {
    act: sizedLimits(nAssessors * nAttributes, c.sessionsPerYear, c.actFalseAlarmsPerYear, c.ewmaLambda, c.cusumK),
    watch: sizedLimits(nAssessors * nAttributes, c.sessionsPerYear, c.watchFalseAlarmsPerYear, c.ewmaLambda, c.cusumK),
  };
  const levelSeries = buildAssessorSeries(ctx.history, ['level']);
  const byAssessor = new Map<string, typeof levelSeries>();
  for (const series of levelSeries) byAssessor.set(series.assessor, [...(byAssessor.get(series.assessor) ?? []), series]);
  const out: Flag[] = [];
  for (const [assessor, seriesList] of byAssessor) {
    const options: SegmentOptions = {
      baseline: { fullValues: c.baselineSessions, minimumValues: c.minBaselineSessions },
      restartSessions: restartSessionsFor(ctx.history, assessor),
    };
    const attributeSignals = seriesList
      .map((series) => ({
        attribute: series.attribute,
        signal: evaluateChart(series.points, options, attributeLimits, c.ewmaLambda, c.cusumK, false, minimumShift(ctx, series.attribute)),
      }))
      .filter((entry): entry is { attribute: string; signal: ChartSignal } => entry.signal !== null);
    const summary = summarySeries(
      seriesList.map((s) => s.points),
      options,
    );
    const summarySignal = evaluateChart(summary, options, summaryLimits, c.ewmaLambda, c.cusumK, c.westernElectricWatch);
    if (summarySignal) {
      const matching = attributeSignals.filter((a) => a.signal.direction === summarySignal.direction);
      const shifts = seriesList.map((s) => recentLevelShift(s.points, options)).filter((v): v is number => v !== null);
      const meanShift = shifts.length ? shifts.reduce((a, b) => a + b, 0) / shifts.length : 0;
      // The summary is in z units; the act magnitude guard uses the mean shift in scale points.
      const guard = Math.min(...seriesList.map((s) => minimumShift(ctx, s.attribute)));
      if (summarySignal.severity === 'act' && Math.abs(meanShift) < guard) summarySignal.severity = 'watch';
      out.push({
        kind: 'drift',
        assessor,
        product: null,
        attribute: null,
        firstSession: summarySignal.changeSession,
        severity: summarySignal.severity,
        evidence: {
          test: `${summarySignal.chart} chart on the per-assessor summary series (median over attributes of standardised level offsets)`,
          statistic: summarySignal.statistic,
          pValue: null,
          qValue: null,
          n: summarySignal.nPoints,
          threshold: thresholdText(summarySignal, nAssessors, 'per-assessor summary charts'),
          signalSession: summarySignal.signalSession,
          lastSession: ctx.history.sessions[ctx.history.sessions.length - 1]?.label,
          direction: summarySignal.direction,
          limit: summarySignal.limit,
          baseline: summarySignal.baseline,
          meanRecentShiftPoints: meanShift,
          attributesSignalling: matching.map((a) => a.attribute),
          ...(summarySignal.rules ? { rules: summarySignal.rules } : {}),
        },
        message: `Since ${summarySignal.changeSession}, ${assessor}'s ratings have moved ${summarySignal.direction === 'up' ? 'upward' : 'downward'} relative to their own earlier level (by about ${points(Math.abs(meanShift))} points on average over the last four sessions); the ${summarySignal.chart} chart signalled at ${summarySignal.signalSession}.`,
      });
      continue;
    }
    for (const { attribute, signal } of attributeSignals) {
      out.push({
        kind: 'drift',
        assessor,
        product: null,
        attribute,
        firstSession: signal.changeSession,
        severity: signal.severity,
        evidence: {
          test: `${signal.chart} chart on the level-offset series`,
          statistic: signal.statistic,
          pValue: null,
          qValue: null,
          n: signal.nPoints,
          threshold: thresholdText(signal, nAssessors * nAttributes, 'assessor × attribute charts'),
          signalSession: signal.signalSession,
          lastSession: ctx.history.sessions[ctx.history.sessions.length - 1]?.label,
          direction: signal.direction,
          limit: signal.limit,
          baseline: signal.baseline,
          recentShiftPoints: signal.recentShift,
        },
        message: `Since ${signal.changeSession}, ${assessor}'s ${attribute} ratings have moved ${signal.direction === 'up' ? 'upward' : 'downward'} relative to their own earlier level (by about ${points(Math.abs(signal.recentShift))} points over the last ${sessionsText(Math.min(4, signal.nPoints))}); the ${signal.chart} chart signalled at ${signal.signalSession}.`,
      });
    }
  }
  return out;
}

/** Act magnitude guard for drift: the lenient/harsh watch offset (level.watchFraction of the scale range). */
function minimumShift(ctx: FlagContext, attribute: string): number {
  return ctx.settings.level.watchFraction * (ctx.scaleRange.get(attribute) ?? 1);
}

function recentLevelShift(series: readonly SeriesPoint[], options: SegmentOptions): number | null {
  const segments = standardiseSegments(series, options);
  const segment = segments[segments.length - 1];
  if (!segment || segment.points.length === 0 || segment.baseline.centre === null) return null;
  const recent = segment.points.slice(-4);
  return recent.reduce((s, p) => s + p.value, 0) / recent.length - segment.baseline.centre;
}

function thresholdText(signal: ChartSignal, nCharts: number, setName: string): string {
  if (signal.chart === 'Western Electric') return `Western Electric rule ${signal.rules?.join(', ')} (watch only)`;
  const l = signal.severity === 'act' ? signal.limits.act : signal.limits.watch;
  const provisional = signal.baseline.provisional ? '; baseline provisional, so watch at most' : '';
  const guard = signal.severity === 'act' ? '; act also needs a recent shift of at least the lenient/harsh watch offset' : '';
  return `EWMA limit L = ${l.ewmaL.toFixed(3)} (widened for the estimated centre), sized for ARL0 ${l.targetArl0} across ${nCharts} ${setName}${provisional}${guard}`;
}
