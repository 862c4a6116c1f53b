/**
 * Panel monitor overview: per assessor, act/watch flag counts per kind, sample sizes and a small
 * EWMA chart of the assessor's summary series. Assessors are listed by code, never ranked.
 */
import type { ChartDesigns, MonitoredSegment, SeriesPoint } from '../analysis/monitor/chart.js';
import type { Flag } from '../domain/flags.js';
import { buildControlChart, type ChartView } from './charts/control-chart.js';
import { monitorChartInputs } from './charts/monitor-charts.js';
import {
  assessorMonitorHref,
  countByKind,
  monitorCrumbs,
  monitorHref,
  REVIEW_NOTICE,
  type KindCount,
  type RefitStatusView,
} from './monitor-common.js';
import type { PageViewBase } from './page-common.js';

export interface MonitorEventInput {
  kind: 'retraining' | 'control-batch' | 'note' | 'reference-period';
  session: string;
  /** Last session of a reference period. */
  untilSession?: string | null;
  assessor: string | null;
  note: string;
}

export interface AssessorOverview {
  assessor: string;
  href: string;
  /** Sessions in which the assessor has indices (rated at least one attribute). */
  nSessions: number;
  /** Ratings behind those indices. */
  nRatings: number;
  nAct: number;
  nWatch: number;
  kinds: KindCount[];
  /** Small EWMA chart of the median standardised level offset over attributes. */
  summaryChart: ChartView;
  baselineStatus: 'final' | 'provisional' | 'none';
}

export interface MonitorOverviewView extends PageViewBase {
  panel: string;
  notices: readonly string[];
  refit: RefitStatusView;
  nSessions: number;
  firstSession: string | null;
  lastSession: string | null;
  nAttributes: number;
  assessors: AssessorOverview[];
  /** Flags about products or the panel as a whole (no assessor). */
  panelFlags: KindCount[];
  nFlagsOpen: number;
  links: { label: string; href: string }[];
}

export interface SessionRef {
  label: string;
  date: string;
}

/** A series with its monitored segments (analysis/monitor/chart.ts monitorSeries). */
export interface MonitoredSeriesInput {
  series: SeriesPoint[];
  segments: MonitoredSegment[];
}

export interface AssessorOverviewInput {
  assessor: string;
  nSessions: number;
  nRatings: number;
  /** The assessor's summary series (median z of the level offset over attributes). */
  summary: MonitoredSeriesInput;
}

export interface MonitorOverviewInput {
  panel: string;
  sessions: SessionRef[];
  nAttributes: number;
  assessors: AssessorOverviewInput[];
  /** Current flags that are still open (dismissed/closed ones are not counted). */
  openFlags: readonly Flag[];
  events: readonly MonitorEventInput[];
  designs: ChartDesigns;
  refit: RefitStatusView;
}

export function eventMarks(events: readonly MonitorEventInput[], assessor: string | null): { session: string; label: string }[] {
  return events
    .filter((e) => e.assessor === null || e.assessor === assessor)
    .flatMap((e) =>
      e.kind === 'reference-period'
        ? [
            { session: e.session, label: 'reference period from' },
            { session: e.untilSession ?? e.session, label: 'reference period to' },
          ]
        : [{ session: e.session, label: e.kind === 'control-batch' ? 'new control batch' : e.kind }],
    );
}

export function buildMonitorOverviewView(input: MonitorOverviewInput): MonitorOverviewView {
  const labels = input.sessions.map((s) => s.label);
  const assessors = input.assessors.map((a): AssessorOverview => {
    const own = input.openFlags.filter((f) => f.assessor === a.assessor);
    const charts = monitorChartInputs({
      title: `${a.assessor}, level over attributes`,
      yLabel: 'median z',
      sessions: labels,
      series: a.summary.series,
      segments: a.summary.segments,
      designs: input.designs,
      events: eventMarks(input.events, a.assessor),
      size: 'small',
      role: 'level-summary',
      owner: { assessor: a.assessor, attribute: null },
      flags: own,
    });
    return {
      assessor: a.assessor,
      href: assessorMonitorHref(input.panel, a.assessor),
      nSessions: a.nSessions,
      nRatings: a.nRatings,
      nAct: own.filter((f) => f.severity === 'act').length,
      nWatch: own.filter((f) => f.severity === 'watch').length,
      kinds: countByKind(own),
      summaryChart: buildControlChart(charts.ewma),
      baselineStatus: charts.baselineStatus,
    };
  });
  return {
    title: `Monitor: ${input.panel}`,
    breadcrumbs: monitorCrumbs(input.panel, null),
    panel: input.panel,
    notices: REVIEW_NOTICE,
    refit: input.refit,
    nSessions: input.sessions.length,
    firstSession: input.sessions[0]?.label ?? null,
    lastSession: input.sessions[input.sessions.length - 1]?.label ?? null,
    nAttributes: input.nAttributes,
    assessors,
    panelFlags: countByKind(input.openFlags.filter((f) => f.assessor === null)),
    nFlagsOpen: input.openFlags.length,
    links: [
      { label: 'Flags', href: monitorHref(input.panel, 'flags') },
      { label: 'Retraining', href: monitorHref(input.panel, 'retraining') },
      { label: 'Product stability', href: monitorHref(input.panel, 'products') },
      { label: 'Control product', href: monitorHref(input.panel, 'control') },
      { label: 'Events', href: monitorHref(input.panel, 'events') },
      { label: 'Thresholds', href: monitorHref(input.panel, 'settings') },
    ],
  };
}
