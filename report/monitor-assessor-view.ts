/**
 * One assessor over time: the summary series (median standardised level over attributes) with
 * EWMA and CUSUM, and for the chosen attribute the five index series as individuals charts
 * plus EWMA/CUSUM of the level offset. Events are marked; provisional limits are dashed.
 */
import type { AssessorSessionIndices } from '../analysis/indices/types.js';
import { monitorSeries, type ChartDesigns } from '../analysis/monitor/chart.js';
import type { Flag } from '../domain/flags.js';
import { buildControlChart, type ChartView } from './charts/control-chart.js';
import { monitorChartInputs } from './charts/monitor-charts.js';
import { assessorMonitorHref, evidenceItems, monitorCrumbs, REVIEW_NOTICE, type EvidenceItem } from './monitor-common.js';
import { eventMarks, restartSessionsFor, type MonitorEventInput } from './monitor-overview-view.js';
import { indexIndices, measureSeries, MEASURES, summarySeries, type MeasureKey, type SessionRef } from './monitor-series.js';
import type { PageViewBase } from './page-common.js';

export interface MeasurePanel {
  key: MeasureKey;
  label: string;
  /** Sessions with a value / sessions of the panel. */
  nValues: number;
  /** The latest value on the chart's scale, or null. */
  latestValue: number | null;
  baselineStatus: 'final' | 'provisional' | 'none';
  nReference: number;
  charts: ChartView[];
}

export interface AssessorMonitorView extends PageViewBase {
  panel: string;
  assessor: string;
  notices: readonly string[];
  nSessions: number;
  attribute: string | null;
  attributeLinks: { label: string; href: string; isCurrent: boolean }[];
  summary: { charts: ChartView[]; baselineStatus: 'final' | 'provisional' | 'none'; nReference: number };
  measures: MeasurePanel[];
  flags: { kind: string; severity: string; attribute: string | null; product: string | null; firstSession: string; message: string; evidence: EvidenceItem[] }[];
  events: MonitorEventInput[];
}

export interface AssessorMonitorInput {
  panel: string;
  assessor: string;
  sessions: SessionRef[];
  attributes: string[];
  /** The chosen attribute (defaults to the first). */
  attribute?: string | null;
  indices: readonly AssessorSessionIndices[];
  flags: readonly Flag[];
  events: readonly MonitorEventInput[];
  designs: ChartDesigns;
}

export function buildAssessorMonitorView(input: AssessorMonitorInput): AssessorMonitorView {
  const index = indexIndices(input.indices.filter((ix) => ix.assessor === input.assessor));
  const labels = input.sessions.map((s) => s.label);
  const attribute = input.attribute && input.attributes.includes(input.attribute) ? input.attribute : (input.attributes[0] ?? null);
  const restartSessions = restartSessionsFor(input.events, input.assessor);
  const marks = eventMarks(input.events, input.assessor);
  const summary = summarySeries(index, input.sessions, input.assessor, input.attributes, { restartSessions });
  const summaryCharts = monitorChartInputs({
    title: 'Level over attributes (median z)',
    yLabel: 'median z',
    sessions: labels,
    series: summary,
    segments: monitorSeries(summary, input.designs, { restartSessions }),
    designs: input.designs,
    events: marks,
  });
  const measures: MeasurePanel[] =
    attribute === null
      ? []
      : MEASURES.map((measure) => {
          const series = measureSeries(index, input.sessions, input.assessor, attribute, measure);
          const charts = monitorChartInputs({
            title: `${measure.label}, ${attribute}`,
            yLabel: measure.yLabel,
            sessions: labels,
            series,
            segments: monitorSeries(series, input.designs, { restartSessions }),
            designs: input.designs,
            events: marks,
          });
          const present = series.filter((p) => p.value !== null);
          const shown = measure.key === 'offset' ? [charts.individuals, charts.ewma, charts.cusum] : [charts.individuals];
          return {
            key: measure.key,
            label: measure.label,
            nValues: present.length,
            latestValue: present.length ? present[present.length - 1].value : null,
            baselineStatus: charts.baselineStatus,
            nReference: charts.nReference,
            charts: shown.map(buildControlChart),
          };
        });
  return {
    title: `Assessor ${input.assessor}`,
    breadcrumbs: monitorCrumbs(input.panel, `Assessor ${input.assessor}`),
    panel: input.panel,
    assessor: input.assessor,
    notices: REVIEW_NOTICE,
    nSessions: new Set(input.indices.filter((ix) => ix.assessor === input.assessor).map((ix) => ix.session)).size,
    attribute,
    attributeLinks: input.attributes.map((a) => ({
      label: a,
      href: assessorMonitorHref(input.panel, input.assessor, a),
      isCurrent: a === attribute,
    })),
    summary: {
      charts: [summaryCharts.ewma, summaryCharts.cusum, summaryCharts.individuals].map(buildControlChart),
      baselineStatus: summaryCharts.baselineStatus,
      nReference: summaryCharts.nReference,
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
        evidence: evidenceItems(f.evidence),
      })),
    events: input.events.filter((e) => e.assessor === null || e.assessor === input.assessor).map((e) => ({ ...e })),
  };
}
