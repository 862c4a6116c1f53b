/**
 * One assessor over time: the summary series (median standardised level over attributes) with
 * EWMA and CUSUM, and for the chosen attribute the five index series as individuals charts
 * plus EWMA/CUSUM of the level offset. Events are marked; provisional limits are dashed.
 */
import type { ChartDesigns } from '../analysis/monitor/chart.js';
import type { Flag } from '../domain/flags.js';
import { buildControlChart, type ChartView } from './charts/control-chart.js';
import { monitorChartInputs } from './charts/monitor-charts.js';
import { assessorMonitorHref, evidenceItems, monitorCrumbs, REVIEW_NOTICE, type EvidenceItem } from './monitor-common.js';
import { eventMarks, type MonitoredSeriesInput, type MonitorEventInput, type SessionRef } from './monitor-overview-view.js';
import type { PageViewBase } from './page-common.js';

export interface MeasureInput extends MonitoredSeriesInput {
  key: string;
  label: string;
  /** Units of the charted value, e.g. "offset (scale points)", "log(s_a / s_rest)". */
  yLabel: string;
  /** Show EWMA and CUSUM as well as the individuals chart. */
  withSmoothCharts: boolean;
}

export interface MeasurePanel {
  key: string;
  label: string;
  /** Sessions with a value. */
  nValues: number;
  /** The latest value on the chart's scale, or null. */
  latestValue: number | null;
  baselineStatus: 'final' | 'provisional' | 'none';
  nReference: number;
  baselineFromReferencePeriod: boolean;
  charts: ChartView[];
}

export interface AssessorMonitorView extends PageViewBase {
  panel: string;
  assessor: string;
  notices: readonly string[];
  nSessions: number;
  attribute: string | null;
  attributeLinks: { label: string; href: string; isCurrent: boolean }[];
  summary: { charts: ChartView[]; baselineStatus: 'final' | 'provisional' | 'none'; nReference: number; baselineFromReferencePeriod: boolean };
  measures: MeasurePanel[];
  flags: { kind: string; severity: string; attribute: string | null; product: string | null; firstSession: string; message: string; evidence: EvidenceItem[] }[];
  events: MonitorEventInput[];
}

export interface AssessorMonitorInput {
  panel: string;
  assessor: string;
  sessions: SessionRef[];
  attributes: string[];
  /** The attribute whose measures are given (null when the panel has none). */
  attribute: string | null;
  nSessions: number;
  summary: MonitoredSeriesInput;
  measures: MeasureInput[];
  flags: readonly Flag[];
  events: readonly MonitorEventInput[];
  designs: ChartDesigns;
}

/** The level offsets are measured from the median of the other assessors (docs/methods.md §3.9): drawn at 0. */
export const LEVEL_REFERENCE = { name: 'median of the other assessors', value: 0 } as const;

export function buildAssessorMonitorView(input: AssessorMonitorInput): AssessorMonitorView {
  const labels = input.sessions.map((s) => s.label);
  const marks = eventMarks(input.events, input.assessor);
  const summaryCharts = monitorChartInputs({
    title: 'Level over attributes (median z)',
    yLabel: 'median z',
    sessions: labels,
    series: input.summary.series,
    segments: input.summary.segments,
    designs: input.designs,
    events: marks,
    role: 'level-summary',
    owner: { assessor: input.assessor, attribute: null },
    flags: input.flags,
  });
  const measures = input.measures.map((measure): MeasurePanel => {
    const charts = monitorChartInputs({
      title: `${measure.label}, ${input.attribute}`,
      yLabel: measure.yLabel,
      sessions: labels,
      series: measure.series,
      segments: measure.segments,
      designs: input.designs,
      events: marks,
      role: measure.key === 'level' ? 'level-attribute' : 'index',
      owner: { assessor: input.assessor, attribute: input.attribute },
      flags: input.flags,
      ...(measure.key === 'level' ? { reference: LEVEL_REFERENCE } : {}),
    });
    const present = measure.series.filter((p) => p.value !== null);
    const shown = measure.withSmoothCharts ? [charts.individuals, charts.ewma, charts.cusum] : [charts.individuals];
    return {
      key: measure.key,
      label: measure.label,
      nValues: present.length,
      latestValue: present.length ? present[present.length - 1].value : null,
      baselineStatus: charts.baselineStatus,
      nReference: charts.nReference,
      baselineFromReferencePeriod: charts.baselineFromReferencePeriod,
      charts: shown.map(buildControlChart),
    };
  });
  return {
    title: `Assessor ${input.assessor}`,
    breadcrumbs: monitorCrumbs(input.panel, `Assessor ${input.assessor}`),
    panel: input.panel,
    assessor: input.assessor,
    notices: REVIEW_NOTICE,
    nSessions: input.nSessions,
    attribute: input.attribute,
    attributeLinks: input.attributes.map((a) => ({
      label: a,
      href: assessorMonitorHref(input.panel, input.assessor, a),
      isCurrent: a === input.attribute,
    })),
    summary: {
      charts: [summaryCharts.ewma, summaryCharts.cusum, summaryCharts.individuals].map(buildControlChart),
      baselineStatus: summaryCharts.baselineStatus,
      nReference: summaryCharts.nReference,
      baselineFromReferencePeriod: summaryCharts.baselineFromReferencePeriod,
    },
    measures,
    flags: input.flags
      .filter((f) => f.assessor === input.assessor)
      .map((f) => ({
        kind: f.kind,
        severity: f.severity,
        attribute: f.attribute,
        product: f.product,
        firstSession: f.firstSession,
        message: f.message,
        evidence: evidenceItems(f),
      })),
    events: input.events.filter((e) => e.assessor === null || e.assessor === input.assessor).map((e) => ({ ...e })),
  };
}
