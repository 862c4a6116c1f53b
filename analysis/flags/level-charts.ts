/**
 * The level charts of every assessor, built once per drift pass and read by both the drift flags
 * and the pages: per assessor the summary series (median over attributes of standardised level
 * offsets) and one level-offset series per attribute, each against the robust consensus of the
 * other assessors (docs/methods.md §3.9), with panel-pooled spread floors and the limits of the
 * one chart design (analysis/monitor/chart-design.ts) at the act and watch levels.
 */
import { monitorSeries, type MonitoredSegment, type SegmentOptions, type SeriesPoint } from '../monitor/chart.js';
import { chartSizing, sizedChartDesigns, type ChartSizing } from '../monitor/chart-design.js';
import { buildAssessorSeries, referencePeriodFor, restartSessionsFor, summarySeries, type ConsensusExclusion } from '../monitor/series.js';
import { currentSpread, pooledSpread } from './chart-signal.js';
import type { FlagContext } from './context.js';

export interface LevelChart {
  series: SeriesPoint[];
  segments: MonitoredSegment[];
  /** The panel-pooled spread floor the chart was standardised with, or null. */
  spreadFloorSd: number | null;
}

export interface AssessorLevelCharts {
  summary: LevelChart;
  attributes: Map<string, LevelChart>;
}

/** The level charts of every assessor as the flag engine evaluates them. */
export interface LevelChartSet {
  summarySizing: ChartSizing;
  attributeSizing: ChartSizing;
  /** Per assessor, the per-attribute level series (for the jump rule). */
  byAssessor: Map<string, { attribute: string; points: SeriesPoint[] }[]>;
  charts: Map<string, AssessorLevelCharts>;
  optionsFor: (assessor: string) => SegmentOptions;
}

/** The chart set against the consensus with `exclusions`, or null without assessors or attributes. */
export function prepareLevelCharts(ctx: FlagContext, exclusions: readonly ConsensusExclusion[]): LevelChartSet | null {
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
  // Western Electric rule 1 is drawn for reading; rules 2–4 give watch flags on the summary chart when asked.
  const rules = c.westernElectricWatch ? ([1, 2, 3, 4] as const) : ([1] as const);
  const summaryDesigns = sizedChartDesigns(summarySizing, c.baselineSessions, rules, ctx.sizingMemo);
  const attributeDesigns = sizedChartDesigns(attributeSizing, c.baselineSessions, rules, ctx.sizingMemo);
  const chartOf = (series: SeriesPoint[], options: SegmentOptions, designs: typeof summaryDesigns, spreadFloorSd: number | null): LevelChart => ({
    series,
    segments: monitorSeries(series, designs, { ...options, spreadFloorSd }),
    spreadFloorSd,
  });
  const charts = new Map<string, AssessorLevelCharts>();
  for (const [assessor, seriesList] of byAssessor) {
    const options = optionsFor(assessor);
    charts.set(assessor, {
      summary: chartOf(summaries.get(assessor) as SeriesPoint[], options, summaryDesigns, summaryFloor),
      attributes: new Map(seriesList.map((s) => [s.attribute, chartOf(s.points, options, attributeDesigns, pooledSpread(spreadsByAttribute.get(s.attribute) ?? []))])),
    });
  }
  return { summarySizing, attributeSizing, byAssessor, charts, optionsFor };
}
