/**
 * Drift: a change in an assessor's level relative to their own baseline (methods §3.1–3.5).
 * Charts: EWMA (exact limits) and two-sided tabular CUSUM on the standardised level-offset series,
 * per assessor (summary = median over attributes of per-attribute z, itself baselined) and per
 * assessor × attribute. Limits are sized for the number of charts K in each set so that the set
 * gives about `actFalseAlarmsPerYear` (resp. watch) false signals per year: ARL0 = K·sessions/budget
 * (methods §3.4). Act signals are downgraded to watch while the baseline is provisional (§6.3).
 */
import type { Flag, FlagSeverity } from '../../domain/flags.js';
import { monitorSeries, standardiseSegments, type BaselineSource, type MonitoredSegment, type SegmentOptions, type SeriesPoint } from '../monitor/chart.js';
import { actChartDesigns, chartLimitWidth, chartSizing, CUSUM_SIZING_STATES, type ChartSizing } from '../monitor/chart-design.js';
import { cusumChart, cusumIntervalForArl0 } from '../monitor/cusum.js';
import { ewmaChart } from '../monitor/ewma.js';
import { individualsChart } from '../monitor/shewhart.js';
import { buildAssessorSeries, median, referencePeriodFor, restartSessionsFor, summarySeries, type ConsensusExclusion } from '../monitor/series.js';
import { detectJump, type Jump } from '../monitor/jump.js';
import type { PanelHistory } from '../monitor/series.js';
import { buildContext, type FlagContext } from './context.js';
import type { PanelThresholds } from './settings.js';
import { points, sessionsText } from './format.js';

export { chartSizing, type ChartSizing };

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
): ChartSignal | null {
  const segments = standardiseSegments(series, { ...options, spreadFloorSd });
  const segment = segments[segments.length - 1];
  if (!segment || segment.points.length === 0 || segment.baseline.centre === null || segment.spreadUsedSd === undefined) return null;
  const centre = segment.baseline.centre;
  const spreadSd = segment.spreadUsedSd;
  const z = segment.points.map((p) => p.z);
  const nReference = segment.baseline.nReference;
  const floorActive = spreadFloorSd !== null && spreadFloorSd > 0;
  const ewma = ewmaChart(z, { lambda: sizing.lambda, L: 1 });
  const changeH = cusumIntervalForArl0(sizing.k, sizing.watchTargetArl0, CUSUM_SIZING_STATES);
  const cusum = cusumChart(z, { k: sizing.k, h: changeH });
  const provisional = segment.baseline.status === 'provisional';
  const recent = segment.points.slice(-4);
  const recentShift = recent.reduce((s, p) => s + p.value, 0) / recent.length - centre;
  const baseline = {
    centre,
    spreadSd,
    nReference,
    provisional,
    startSession: segment.startSession,
    pooledSpreadFloorSd: spreadFloorSd,
    source: segment.baselineSource,
    chartedFromSession: segment.points[0].session,
  };
  const changeSession = (): string | null => {
    const signal = cusum.firstSignal;
    return signal ? segment.points[signal.changePointIndex].session : null;
  };
  for (const level of ['act', 'watch'] as const) {
    const targetArl0 = level === 'act' ? sizing.actTargetArl0 : sizing.watchTargetArl0;
    const limitWidth = chartLimitWidth(sizing.lambda, targetArl0, nReference, floorActive);
    const t = ewma.points.findIndex((e) => Math.abs(e.statistic) > limitWidth * e.limit);
    if (t < 0) continue;
    const e = ewma.points[t];
    const severity: FlagSeverity = level === 'act' && !provisional && Math.abs(recentShift) >= minimumActShift ? 'act' : 'watch';
    return {
      severity,
      chart: 'EWMA',
      direction: e.statistic > 0 ? 'up' : 'down',
      statistic: e.statistic,
      limit: limitWidth * e.limit,
      limitWidth,
      targetArl0,
      signalSession: segment.points[t].session,
      changeSession: changeSession() ?? segment.points[t].session,
      baseline,
      recentShift,
      nPoints: z.length,
    };
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
        limitWidth: 0,
        targetArl0: 0,
        rules: chart[t].rules,
        signalSession: segment.points[t].session,
        changeSession: segment.points[t].session,
        baseline,
        recentShift,
        nPoints: z.length,
      };
    }
  }
  return null;
}

/** Median of the defined values, or null when fewer than 3 (too few to pool). */
export function pooledSpread(spreads: readonly (number | null)[]): number | null {
  const defined = spreads.filter((v): v is number => v !== null && v > 0);
  return defined.length >= 3 ? median(defined) : null;
}

/**
 * Drift and jump flags. The level series are against the median of the other assessors; an
 * assessor with an act-level change is then left out of that consensus from the change on and
 * the charts are evaluated once more (one iteration, docs/methods.md "Panel reference").
 */
export function driftFlags(ctx: FlagContext): Flag[] {
  const first = driftPass(ctx, []);
  const exclusions = actExclusions(first);
  return exclusions.length === 0 ? first : driftPass(ctx, exclusions);
}

/** The level charts of every assessor as the flag engine evaluates them. */
interface LevelChartSet {
  summarySizing: ChartSizing;
  attributeSizing: ChartSizing;
  byAssessor: Map<string, { attribute: string; points: SeriesPoint[] }[]>;
  summaries: Map<string, SeriesPoint[]>;
  summaryFloor: number | null;
  spreadsByAttribute: Map<string, (number | null)[]>;
  optionsFor: (assessor: string) => SegmentOptions;
}

function prepareLevelCharts(ctx: FlagContext, exclusions: readonly ConsensusExclusion[]): LevelChartSet | null {
  const c = ctx.settings.charts;
  const nAssessors = ctx.assessors.length;
  const nAttributes = ctx.history.attributes.length;
  if (nAssessors === 0 || nAttributes === 0) return null;
  const summarySizing = chartSizing(nAssessors, c.sessionsPerYear, c.actFalseAlarmsPerYear, c.watchFalseAlarmsPerYear, c.ewmaLambda, c.cusumK);
  const attributeSizing = chartSizing(nAssessors * nAttributes, c.sessionsPerYear, c.actFalseAlarmsPerYear, c.watchFalseAlarmsPerYear, c.ewmaLambda, c.cusumK);
  const levelSeries = buildAssessorSeries(ctx.history, ['level'], { levelExclusions: exclusions });
  const byAssessor = new Map<string, { attribute: string; points: SeriesPoint[] }[]>();
  for (const series of levelSeries) byAssessor.set(series.assessor, [...(byAssessor.get(series.assessor) ?? []), series]);
  const optionsFor = (assessor: string): SegmentOptions => ({
    baseline: { fullValues: c.baselineSessions, minimumValues: c.minBaselineSessions },
    restartSessions: restartSessionsFor(ctx.history, assessor),
    referenceSessions: referencePeriodFor(ctx.history, assessor)?.sessions ?? null,
  });
  // Panel-pooled spreads: per attribute over assessors, and over the assessors' summary series.
  const spreadsByAttribute = new Map<string, (number | null)[]>();
  const summaries = new Map<string, SeriesPoint[]>();
  for (const [assessor, seriesList] of byAssessor) {
    const options = optionsFor(assessor);
    for (const series of seriesList) spreadsByAttribute.set(series.attribute, [...(spreadsByAttribute.get(series.attribute) ?? []), currentSpread(series.points, options)]);
    summaries.set(
      assessor,
      summarySeries(
        seriesList.map((s) => s.points),
        options,
      ),
    );
  }
  const summaryFloor = pooledSpread([...summaries].map(([assessor, points]) => currentSpread(points, optionsFor(assessor))));
  return { summarySizing, attributeSizing, byAssessor, summaries, summaryFloor, spreadsByAttribute, optionsFor };
}

/** Exclusions for the second pass: assessors with an act-level level change, from its session on. */
function actExclusions(flags: readonly Flag[]): ConsensusExclusion[] {
  return flags.filter((f) => f.severity === 'act' && f.assessor !== null).map((f) => ({ assessor: f.assessor as string, attribute: f.attribute, fromSession: f.firstSession }));
}

export interface LevelChart {
  series: SeriesPoint[];
  segments: MonitoredSegment[];
}

/**
 * The level charts of every assessor exactly as the drift and jump flags evaluate them (the same
 * consensus with the same exclusions, spread floors and limit widths), drawn at the act level:
 * the pages draw these, so every act-limit crossing on a page is one the flag engine saw.
 */
export function assessorLevelCharts(history: PanelHistory, settings: PanelThresholds): Map<string, { summary: LevelChart; attributes: Map<string, LevelChart> }> {
  // A page asks once per assessor; the charts of the whole panel are computed once per history.
  const cached = levelChartCache.get(history);
  if (cached && cached.settings === settings) return cached.charts;
  const charts = computeLevelCharts(history, settings);
  levelChartCache.set(history, { settings, charts });
  return charts;
}

const levelChartCache = new WeakMap<PanelHistory, { settings: PanelThresholds; charts: Map<string, { summary: LevelChart; attributes: Map<string, LevelChart> }> }>();

function computeLevelCharts(history: PanelHistory, settings: PanelThresholds): Map<string, { summary: LevelChart; attributes: Map<string, LevelChart> }> {
  const ctx = buildContext(history, settings);
  const set = prepareLevelCharts(ctx, actExclusions(driftPass(ctx, [])));
  const out = new Map<string, { summary: LevelChart; attributes: Map<string, LevelChart> }>();
  if (!set) return out;
  const rules = settings.charts.westernElectricWatch ? ([1, 2, 3, 4] as const) : ([1] as const);
  const summaryDesigns = actChartDesigns(set.summarySizing, settings.charts.baselineSessions, rules);
  const attributeDesigns = actChartDesigns(set.attributeSizing, settings.charts.baselineSessions, rules);
  for (const [assessor, seriesList] of set.byAssessor) {
    const options = set.optionsFor(assessor);
    const summary = set.summaries.get(assessor) as SeriesPoint[];
    out.set(assessor, {
      summary: { series: summary, segments: monitorSeries(summary, summaryDesigns, { ...options, spreadFloorSd: set.summaryFloor }) },
      attributes: new Map(
        seriesList.map((s) => [
          s.attribute,
          { series: s.points, segments: monitorSeries(s.points, attributeDesigns, { ...options, spreadFloorSd: pooledSpread(set.spreadsByAttribute.get(s.attribute) ?? []) }) },
        ]),
      ),
    });
  }
  return out;
}

function driftPass(ctx: FlagContext, exclusions: readonly ConsensusExclusion[]): Flag[] {
  const set = prepareLevelCharts(ctx, exclusions);
  if (!set) return [];
  const c = ctx.settings.charts;
  const nAssessors = ctx.assessors.length;
  const { summarySizing, attributeSizing, byAssessor, summaries, summaryFloor, spreadsByAttribute, optionsFor } = set;
  const out: Flag[] = [];
  for (const [assessor, seriesList] of byAssessor) {
    const options = optionsFor(assessor);
    const attributeSignals = seriesList
      .map((series) => ({
        attribute: series.attribute,
        signal: evaluateChart(series.points, options, attributeSizing, false, minimumShift(ctx, series.attribute), pooledSpread(spreadsByAttribute.get(series.attribute) ?? [])),
      }))
      .filter((entry): entry is { attribute: string; signal: ChartSignal } => entry.signal !== null);
    const summary = summaries.get(assessor) as SeriesPoint[];
    const summarySignal = evaluateChart(summary, options, summarySizing, c.westernElectricWatch, 0, summaryFloor);
    const jump = detectJump(
      seriesList.map((s) => ({ attribute: s.attribute, points: s.points, spreadFloorSd: pooledSpread(spreadsByAttribute.get(s.attribute) ?? []) })),
      options,
      { nCharts: nAssessors, sessionsPerYear: c.sessionsPerYear, falseAlarmsPerYear: c.actFalseAlarmsPerYear, minJumpSd: c.jumpMinSd, attributeShare: c.jumpAttributeShare },
    );
    if (jump) {
      out.push(jumpFlag(ctx, assessor, jump, summarySignal));
      continue;
    }
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
          threshold: thresholdText(summarySignal, summarySizing, 'per-assessor summary charts'),
          signalSession: summarySignal.signalSession,
          lastSession: ctx.history.sessions[ctx.history.sessions.length - 1]?.label,
          direction: summarySignal.direction,
          limit: summarySignal.limit,
          limitWidth: summarySignal.limitWidth,
          baseline: summarySignal.baseline,
          meanRecentShiftPoints: meanShift,
          attributesSignalling: matching.map((a) => a.attribute),
          ...(summarySignal.rules ? { rules: summarySignal.rules } : {}),
        },
        message: `Since ${summarySignal.changeSession}, ${assessor}'s ratings have moved ${summarySignal.direction === 'up' ? 'upward' : 'downward'} relative to ${baselineWords(summarySignal)} (${Math.abs(meanShift) < 0.05 ? "by less than 0.1 points on average over the last four sessions, though the chart's weighted history moved further" : `by about ${points(Math.abs(meanShift))} points on average over the last four sessions`}); the ${summarySignal.chart} chart signalled at ${summarySignal.signalSession}.`,
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
          threshold: thresholdText(signal, attributeSizing, 'assessor × attribute charts'),
          signalSession: signal.signalSession,
          lastSession: ctx.history.sessions[ctx.history.sessions.length - 1]?.label,
          direction: signal.direction,
          limit: signal.limit,
          limitWidth: signal.limitWidth,
          baseline: signal.baseline,
          recentShiftPoints: signal.recentShift,
        },
        message: `Since ${signal.changeSession}, ${assessor}'s ${attribute} ratings have moved ${signal.direction === 'up' ? 'upward' : 'downward'} relative to ${baselineWords(signal)} (by about ${points(Math.abs(signal.recentShift))} points over the last ${sessionsText(Math.min(4, signal.nPoints))}); the ${signal.chart} chart signalled at ${signal.signalSession}.`,
      });
    }
  }
  return out;
}

function baselineWords(signal: ChartSignal): string {
  return signal.baseline.source === 'reference-period' ? 'their level in the chosen reference period' : 'their own earlier level';
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

export function thresholdText(signal: ChartSignal, sizing: ChartSizing, setName: string): string {
  if (signal.chart === 'Western Electric') return `Western Electric rule ${signal.rules?.join(', ')} (watch only)`;
  const provisional = signal.baseline.provisional ? '; baseline provisional, so watch at most' : '';
  const guard = signal.severity === 'act' ? '; act also needs a recent shift of at least the lenient/harsh watch offset' : '';
  return `EWMA (λ = ${sizing.lambda}) limit L = ${signal.limitWidth.toFixed(3)}, sized for an in-control ARL of ${signal.targetArl0} sessions averaged over the baseline's estimation error, across ${sizing.nCharts} ${setName}${provisional}${guard}`;
}

/**
 * A one-session jump on most attributes, worded as a jump with its size. Act unless the baseline is
 * provisional or the median jump is below the lenient/harsh watch offset; it replaces the slow-drift
 * wording, which would average the jump over four sessions and understate it.
 */
function jumpFlag(ctx: FlagContext, assessor: string, jump: Jump, ewma: ChartSignal | null): Flag {
  const guard = Math.min(...jump.attributes.map((a) => minimumShift(ctx, a.attribute)));
  const severity: FlagSeverity = !jump.provisional && Math.abs(jump.medianJumpPoints) >= guard ? 'act' : 'watch';
  const verb = jump.direction === 'up' ? 'rose' : 'fell';
  return {
    kind: 'drift',
    assessor,
    product: null,
    attribute: null,
    firstSession: jump.session,
    severity,
    evidence: {
      test: 'Individuals rule on each attribute\'s level against the other assessors: the session\'s value minus the mean of the previous (up to) four, in units of the attribute\'s session-to-session SD; counted across attributes',
      statistic: jump.medianJumpSd,
      pValue: null,
      qValue: null,
      n: jump.nAttributes,
      threshold: `a jump of at least ${jump.thresholdSd.toFixed(2)} SDs in the same direction on at least ${jump.minAttributes} of ${jump.nAttributes} attributes (sized for ${jump.nCharts} assessors at ${jump.falseAlarmsPerYear} false alarms per year; chance per session ${jump.chancePerSession.toExponential(1)})${jump.provisional ? '; baseline provisional, so watch at most' : ''}${severity === 'act' ? '; act also needs a median jump of at least the lenient/harsh watch offset' : ''}`,
      pattern: 'jump',
      signalSession: jump.session,
      lastSession: ctx.history.sessions[ctx.history.sessions.length - 1]?.label,
      direction: jump.direction,
      jumpPoints: jump.medianJumpPoints,
      attributesJumped: jump.attributes.map((a) => a.attribute),
      nAttributesJumped: jump.attributes.length,
      attributes: jump.attributes,
      earlierJumpSessions: jump.earlierSessions,
      ...(ewma ? { ewmaSignalSession: ewma.signalSession, ewmaSeverity: ewma.severity, limitWidth: ewma.limitWidth, baseline: ewma.baseline } : {}),
    },
    message: `In ${jump.session}, ${assessor}'s ratings ${verb} by about ${points(Math.abs(jump.medianJumpPoints))} points on ${jump.attributes.length} of ${jump.nAttributes} attributes compared with their previous sessions (a jump of ${points(Math.abs(jump.medianJumpSd))} times their usual session-to-session spread).`,
  };
}
