/**
 * Drift: a change in an assessor's level relative to their own baseline (methods §3.1–3.5).
 * Charts: EWMA (exact limits) and two-sided tabular CUSUM on the standardised level-offset series,
 * per assessor (summary = median over attributes of per-attribute z, itself baselined) and per
 * assessor × attribute. Limits are sized for the number of charts K in each set so that the set
 * gives about `actFalseAlarmsPerYear` (resp. watch) false signals per year: ARL0 = K·sessions/budget
 * (methods §3.4). Act signals are downgraded to watch while the baseline is provisional (§6.3).
 */
import type { Flag, FlagSeverity } from '../../domain/flags.js';
import type { SeriesPoint } from '../monitor/chart.js';
import type { ChartSizing } from '../monitor/chart-design.js';
import { detectJump, type Jump } from '../monitor/jump.js';
import type { ConsensusExclusion, PanelHistory } from '../monitor/series.js';
import type { ChartSizingMemo } from '../monitor/sizing-memo.js';
import { signalOfSegment, thresholdText, type ChartSignal } from './chart-signal.js';
import { buildContext, type FlagContext } from './context.js';
import { prepareLevelCharts, type AssessorLevelCharts, type LevelChart } from './level-charts.js';
import type { PanelThresholds } from './settings.js';
import { points, sessionsText } from './format.js';

export { chartSizing, type ChartSizing } from '../monitor/chart-design.js';
export { currentSpread, evaluateChart, pooledSpread, thresholdText, type ChartSignal } from './chart-signal.js';
export type { AssessorLevelCharts, LevelChart };

/**
 * Drift and jump flags. The level series are against the median of the other assessors; an
 * assessor with an act-level change is then left out of that consensus from the change on and
 * the charts are evaluated once more (one iteration, docs/methods.md "Panel reference").
 */
export function driftFlags(ctx: FlagContext): Flag[] {
  return driftFlagsWithCharts(ctx).flags;
}

/** The drift and jump flags with the level charts they were read from (after the second pass). */
function driftFlagsWithCharts(ctx: FlagContext): { flags: Flag[]; charts: Map<string, AssessorLevelCharts> } {
  const first = driftPass(ctx, []);
  const exclusions = actExclusions(first.flags);
  return exclusions.length === 0 ? first : driftPass(ctx, exclusions);
}

/** Exclusions for the second pass: assessors with an act-level level change, from its session on. */
function actExclusions(flags: readonly Flag[]): ConsensusExclusion[] {
  return flags.filter((f) => f.severity === 'act' && f.assessor !== null).map((f) => ({ assessor: f.assessor as string, attribute: f.attribute, fromSession: f.firstSession }));
}

/**
 * The level charts of every assessor exactly as the drift and jump flags read them (the same
 * consensus with the same exclusions, spread floors and limit widths; the limits drawn are the act
 * level's): the pages draw these, so every act-limit crossing on a page is one the flag engine saw.
 * Pure; a caller that asks per assessor keeps the result (monitor/panel-context.ts derivedFromHistory).
 */
export function assessorLevelCharts(history: PanelHistory, settings: PanelThresholds, sizingMemo?: ChartSizingMemo): Map<string, AssessorLevelCharts> {
  return driftFlagsWithCharts(buildContext(history, settings, sizingMemo)).charts;
}

function driftPass(ctx: FlagContext, exclusions: readonly ConsensusExclusion[]): { flags: Flag[]; charts: Map<string, AssessorLevelCharts> } {
  const set = prepareLevelCharts(ctx, exclusions);
  if (!set) return { flags: [], charts: new Map() };
  const c = ctx.settings.charts;
  const nAssessors = ctx.assessors.length;
  const { summarySizing, attributeSizing, byAssessor, charts, optionsFor } = set;
  const out: Flag[] = [];
  for (const [assessor, seriesList] of byAssessor) {
    const options = optionsFor(assessor);
    const assessorCharts = charts.get(assessor) as AssessorLevelCharts;
    const attributeCharts = seriesList.map((series) => ({ attribute: series.attribute, chart: assessorCharts.attributes.get(series.attribute) as LevelChart }));
    const attributeSignals = attributeCharts
      .map(({ attribute, chart }) => ({
        attribute,
        signal: signalOfSegment(chart.segments[chart.segments.length - 1], attributeSizing, false, minimumShift(ctx, attribute), chart.spreadFloorSd),
      }))
      .filter((entry): entry is { attribute: string; signal: ChartSignal } => entry.signal !== null);
    const summaryChart = assessorCharts.summary;
    const summarySignal = signalOfSegment(summaryChart.segments[summaryChart.segments.length - 1], summarySizing, c.westernElectricWatch, 0, summaryChart.spreadFloorSd);
    const jump = detectJump(
      attributeCharts.map(({ attribute, chart }) => ({ attribute, points: chart.series, spreadFloorSd: chart.spreadFloorSd })),
      options,
      { nCharts: nAssessors, sessionsPerYear: c.sessionsPerYear, falseAlarmsPerYear: c.actFalseAlarmsPerYear, minJumpSd: c.jumpMinSd, attributeShare: c.jumpAttributeShare },
      ctx.sizingMemo,
    );
    if (jump) {
      out.push(jumpFlag(ctx, assessor, jump, summarySignal));
      continue;
    }
    if (summarySignal) {
      const matching = attributeSignals.filter((a) => a.signal.direction === summarySignal.direction);
      const shifts = attributeCharts.map(({ chart }) => recentLevelShift(chart)).filter((v): v is number => v !== null);
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
  return { flags: out, charts };
}

function baselineWords(signal: ChartSignal): string {
  return signal.baseline.source === 'reference-period' ? 'their level in the chosen reference period' : 'their own earlier level';
}

/** Act magnitude guard for drift: the lenient/harsh watch offset (level.watchFraction of the scale range). */
function minimumShift(ctx: FlagContext, attribute: string): number {
  return ctx.settings.level.watchFraction * (ctx.scaleRange.get(attribute) ?? 1);
}

/** Mean of the last (up to) four charted values minus the centre, in scale points, or null. */
function recentLevelShift(chart: LevelChart): number | null {
  const segment = chart.segments[chart.segments.length - 1];
  if (!segment || segment.points.length === 0 || segment.baseline.centre === null) return null;
  const recent = segment.points.slice(-4);
  return recent.reduce((s, p) => s + p.value, 0) / recent.length - segment.baseline.centre;
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
