/**
 * Panel monitor overview: per assessor, act/watch flag counts per kind, sample sizes and a small
 * EWMA chart of the assessor's summary series. Assessors are listed by code, never ranked.
 */
import type { AssessorSessionIndices } from '../analysis/indices/types.js';
import { monitorSeries, type ChartDesigns } from '../analysis/monitor/chart.js';
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
import { indexIndices, summarySeries, type SessionRef } from './monitor-series.js';
import type { PageViewBase } from './page-common.js';

export interface MonitorEventInput {
  kind: 'retraining' | 'control-batch' | 'note';
  session: string;
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

export interface MonitorOverviewInput {
  panel: string;
  sessions: SessionRef[];
  attributes: string[];
  assessors: string[];
  indices: readonly AssessorSessionIndices[];
  /** Current flags that are still open (dismissed/closed ones are not counted). */
  openFlags: readonly Flag[];
  events: readonly MonitorEventInput[];
  designs: ChartDesigns;
  refit: RefitStatusView;
}

/** Sessions at which the baseline restarts for this assessor (retraining of them, or a panel-wide control batch). */
export function restartSessionsFor(events: readonly MonitorEventInput[], assessor: string | null): string[] {
  return events
    .filter((e) => (e.kind === 'retraining' && (e.assessor === null || e.assessor === assessor)) || e.kind === 'control-batch')
    .map((e) => e.session);
}

export function eventMarks(events: readonly MonitorEventInput[], assessor: string | null): { session: string; label: string }[] {
  return events
    .filter((e) => e.assessor === null || e.assessor === assessor)
    .map((e) => ({ session: e.session, label: e.kind === 'control-batch' ? 'new control batch' : e.kind }));
}

export function buildMonitorOverviewView(input: MonitorOverviewInput): MonitorOverviewView {
  const index = indexIndices(input.indices);
  const labels = input.sessions.map((s) => s.label);
  const assessors = input.assessors.map((assessor): AssessorOverview => {
    const own = input.openFlags.filter((f) => f.assessor === assessor);
    const restartSessions = restartSessionsFor(input.events, assessor);
    const series = summarySeries(index, input.sessions, assessor, input.attributes, { restartSessions });
    const segments = monitorSeries(series, input.designs, { restartSessions });
    const charts = monitorChartInputs({
      title: `${assessor}, level over attributes`,
      yLabel: 'median z',
      sessions: labels,
      series,
      segments,
      designs: input.designs,
      events: eventMarks(input.events, assessor),
      size: 'small',
    });
    const byAttribute = index.get(assessor);
    const sessionsSeen = new Set<string>();
    let nRatings = 0;
    for (const bySession of byAttribute?.values() ?? []) {
      for (const ix of bySession.values()) {
        sessionsSeen.add(ix.session);
        nRatings += ix.nRatings;
      }
    }
    return {
      assessor,
      href: assessorMonitorHref(input.panel, assessor),
      nSessions: sessionsSeen.size,
      nRatings,
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
    nAttributes: input.attributes.length,
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
