/**
 * The loaded context of the monitor pages: the panel, its thresholds with defaults filled in, and
 * the store reads the pages use (flags, period fits, events, retraining…), each made on demand.
 * With the history (fits and indices, through the app's memo) it also lists the assessors and
 * attributes seen in the fits. The page builders (monitor/*-page.ts) are functions of this
 * context; only this loader holds the store connection.
 */
import type { Database } from 'better-sqlite3';
import { assessorLevelCharts, type AssessorLevelCharts, type PanelThresholds } from '../analysis/flags/index.js';
import type { ChartSizingMemo } from '../analysis/monitor/sizing-memo.js';
import { indexLookup, type PanelHistory } from '../analysis/monitor/series.js';
import type { RefitStatusView } from '../report/monitor-common.js';
import { loadPeriodFits, loadSessionQuality, type StoredPeriodFit, type StoredQuality } from '../store/fits-results.js';
import { findPanel, listAssessorCodes, listSessionVersions, type PanelRow } from '../store/fits-sessions.js';
import { listFlags, type FlagQuery, type FlagRecord } from '../store/monitor-flags.js';
import { listPanelEvents, listRetraining, type PanelEvent, type RetrainingRecord } from '../store/monitor-events.js';
import { derivedFromHistory, panelHistoryFor, panelThresholds, PanelNotFound, refitStatus, type HistoryMemo } from './panel-context.js';

/** What the monitor pages read from the store, each read when called. */
export interface MonitorReads {
  flags(query?: FlagQuery): FlagRecord[];
  periodFits(): StoredPeriodFit[];
  sessionQuality(): StoredQuality[];
  events(): PanelEvent[];
  retraining(): RetrainingRecord[];
  /** Assessor codes of the store (not the fitted indices: events can be marked before the first refit). */
  assessorCodes(): string[];
  sessionLabels(): string[];
  refitStatus(): RefitStatusView;
}

export interface MonitorPanel {
  panel: PanelRow;
  thresholds: PanelThresholds;
  read: MonitorReads;
}

export interface MonitorContext extends MonitorPanel {
  history: PanelHistory;
  /** Assessors with indices in the fits, sorted. */
  assessors: string[];
  attributes: string[];
  /** The memo the history came from: values derived from it are kept there (derivedFromHistory). */
  memo: HistoryMemo;
  /** Chart sizings kept with the memo (limit widths, decision intervals, jump rules). */
  sizingMemo: ChartSizingMemo;
  /** The level charts of every assessor as the drift flags read them, computed on first use and kept with the history. */
  levelCharts: () => Map<string, AssessorLevelCharts>;
}

export { panelThresholds } from './panel-context.js';

/** The panel and its store reads, without the history (pages that list flags, retraining, settings). */
export function loadMonitorPanel(db: Database, panelName: string): MonitorPanel {
  const panel = findPanel(db, panelName);
  if (!panel) throw new PanelNotFound(panelName);
  let thresholds: PanelThresholds | undefined;
  return {
    panel,
    get thresholds() {
      return (thresholds ??= panelThresholds(db, panel.id));
    },
    read: {
      flags: (query) => listFlags(db, panel.id, query),
      periodFits: () => loadPeriodFits(db, panel.id),
      sessionQuality: () => loadSessionQuality(db, panel.id),
      events: () => listPanelEvents(db, panel.id),
      retraining: () => listRetraining(db, panel.id),
      assessorCodes: () => listAssessorCodes(db, panel.id),
      sessionLabels: () => listSessionVersions(db, panel.id).map((s) => s.label),
      refitStatus: () => refitStatus(db, panel.id),
    },
  };
}

/** The panel with its history (through the memo; with ratings for the control-product page). */
export function loadMonitorContext(db: Database, panelName: string, memo: HistoryMemo, options: { withRatings?: boolean } = {}): MonitorContext {
  const base = loadMonitorPanel(db, panelName);
  const history = panelHistoryFor(db, base.panel.id, memo, options);
  const assessors = [...indexLookup(history).keys()].sort();
  const thresholds = base.thresholds;
  const sizingMemo = memo.sizing;
  let levelCharts: Map<string, AssessorLevelCharts> | null = null;
  return {
    panel: base.panel,
    thresholds,
    read: base.read,
    history,
    assessors,
    attributes: history.attributes.map((a) => a.name),
    memo,
    sizingMemo,
    levelCharts: () =>
      (levelCharts ??= derivedFromHistory(memo, history, `level charts ${JSON.stringify(thresholds)}`, () => assessorLevelCharts(history, thresholds, sizingMemo))),
  };
}

/** An assessor, product or other part of a panel page that is not there (the route answers 404 for `path`). */
export class NotInPanel extends Error {
  constructor(readonly path: string) {
    super(`Nothing at ${path}.`);
    this.name = 'NotInPanel';
  }
}

/** A form or API value that cannot be used; `detail` is the sentence for the person. */
export class InvalidInput extends Error {
  constructor(readonly detail: string) {
    super(detail);
    this.name = 'InvalidInput';
  }
}
