/**
 * The charts of the monitor pages, from the panel history: chart designs sized like the flag
 * engine's act level, the monitored series of an assessor, the sample sizes behind them.
 * The page builders (monitor/*-page.ts) call these, then a report/ view builder.
 */
import { assessorLevelCharts, type AssessorLevelCharts, type PanelThresholds } from '../analysis/flags/index.js';
import { monitorSeries, type ChartDesigns, type SegmentOptions } from '../analysis/monitor/chart.js';
import { sizedChartDesigns, chartSizing } from '../analysis/monitor/chart-design.js';
import type { ChartSizingMemo } from '../analysis/monitor/sizing-memo.js';
import {
  buildAssessorSeries,
  referencePeriodFor,
  restartSessionsFor,
  summarySeries,
  type IndexSeriesKind,
  type PanelHistory,
} from '../analysis/monitor/series.js';
import type { MonitoredSeriesInput } from '../report/monitor-overview-view.js';

/**
 * Chart designs for a set of nCharts charts at the act level's false-alarm budget (ARL0 = K ×
 * sessions per year / tolerated false alarms per year, methods §3.4), from the one chart design the
 * flag engine uses (analysis/monitor/chart-design.ts): L per segment for its baseline, so a point
 * beyond the drawn limit is one the flag engine saw.
 */
export function chartDesigns(thresholds: PanelThresholds, nCharts: number, sizingMemo?: ChartSizingMemo): { designs: ChartDesigns; baseline: SegmentOptions['baseline'] } {
  const c = thresholds.charts;
  const sizing = chartSizing(Math.max(1, nCharts), c.sessionsPerYear, c.actFalseAlarmsPerYear, c.watchFalseAlarmsPerYear, c.ewmaLambda, c.cusumK);
  return {
    designs: sizedChartDesigns(sizing, c.baselineSessions, c.westernElectricWatch ? [1, 2, 3, 4] : [1], sizingMemo),
    baseline: { fullValues: c.baselineSessions, minimumValues: c.minBaselineSessions },
  };
}

/** Level series of one assessor against the robust consensus of the others, one per attribute (for the summary series). */
function levelSeriesByAttribute(history: PanelHistory, assessor: string) {
  return buildAssessorSeries(history, ['level']).filter((s) => s.assessor === assessor).map((s) => s.points);
}

/** Baseline rules of an assessor's charts: restarts at their retraining events, their reference period. */
export function assessorSegmentOptions(history: PanelHistory, assessor: string, baseline: SegmentOptions['baseline']): SegmentOptions {
  return { baseline, restartSessions: restartSessionsFor(history, assessor), referenceSessions: referencePeriodFor(history, assessor)?.sessions ?? null };
}

/** The assessor's summary series (median z over attributes) and its monitored segments; with the level charts, exactly as the flags saw it. */
export function monitoredSummary(history: PanelHistory, assessor: string, designs: ChartDesigns, baseline: SegmentOptions['baseline'], levelCharts?: Map<string, AssessorLevelCharts>): MonitoredSeriesInput {
  const shared = levelCharts?.get(assessor)?.summary;
  if (shared) return shared;
  const options = assessorSegmentOptions(history, assessor, baseline);
  const series = summarySeries(levelSeriesByAttribute(history, assessor), options);
  return { series, segments: monitorSeries(series, designs, options) };
}

export const MEASURE_LABELS: Record<IndexSeriesKind, { label: string; yLabel: string }> = {
  level: { label: 'Level offset', yLabel: 'offset (scale points)' },
  repeatability: { label: 'Repeatability', yLabel: 'log(s_a / s_rest)' },
  discrimination: { label: 'Discrimination', yLabel: 'log F (products)' },
  agreement: { label: 'Agreement', yLabel: 'atanh r (with the rest)' },
  scaling: { label: 'Scaling', yLabel: 'log β (scale use)' },
};

/** The five index series of one assessor and attribute, monitored. */
export function monitoredMeasures(history: PanelHistory, assessor: string, attribute: string, designs: ChartDesigns, baseline: SegmentOptions['baseline'], levelCharts?: Map<string, AssessorLevelCharts>) {
  const options = assessorSegmentOptions(history, assessor, baseline);
  const sharedLevel = levelCharts?.get(assessor)?.attributes.get(attribute);
  const one = { ...history, attributes: history.attributes.filter((a) => a.name === attribute) };
  return buildAssessorSeries(one)
    .filter((s) => s.assessor === assessor)
    .map((s) => ({
      key: s.kind,
      ...MEASURE_LABELS[s.kind],
      withSmoothCharts: s.kind === 'level',
      series: s.points,
      segments: s.kind === 'level' && sharedLevel ? sharedLevel.segments : monitorSeries(s.points, designs, options),
    }));
}

/** Sessions with indices and ratings behind them, per assessor. */
export function assessorSampleSizes(history: PanelHistory): Map<string, { nSessions: number; nRatings: number }> {
  const out = new Map<string, { sessions: Set<string>; nRatings: number }>();
  for (const result of history.results) {
    for (const row of result.indices) {
      let entry = out.get(row.assessor);
      if (!entry) out.set(row.assessor, (entry = { sessions: new Set(), nRatings: 0 }));
      entry.sessions.add(row.session);
      entry.nRatings += row.nRatings;
    }
  }
  return new Map([...out].map(([assessor, e]) => [assessor, { nSessions: e.sessions.size, nRatings: e.nRatings }]));
}

/** Sessions where control-product baselines restart: a new control batch, or a retraining of the assessor (or everyone). */
export function controlRestartSessions(history: PanelHistory, assessor: string | null): string[] {
  const batches = history.events.filter((e) => e.kind === 'control-batch').map((e) => e.session);
  return [...new Set([...batches, ...(assessor === null ? [] : restartSessionsFor(history, assessor))])];
}
