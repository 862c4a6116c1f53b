/**
 * One loaded panel context for the review pages: the panel's sessions, its flag cases with their
 * histories, the refit status, the held cells and the import behind each session. The page
 * builders (monitor/*-page.ts) are pure functions of this context; only this loader reads the store.
 * The panel history (fits and indices, for the charts) is read on first use, since the review
 * list itself does not need it.
 */
import type { Database } from 'better-sqlite3';
import { validateThresholds, type PanelThresholds } from '../analysis/flags/index.js';
import type { PanelHistory } from '../analysis/monitor/series.js';
import { createChartSizingMemo, type ChartSizingMemo } from '../analysis/monitor/sizing-memo.js';
import type { RefitStatusView } from '../report/monitor-common.js';
import { localTime } from '../report/words.js';
import { findPanel, listSessionVersions, type PanelRow } from '../store/fits-sessions.js';
import { flagHistories, listFlags, loadFlagBuild, type FlagHistoryEntry, type FlagRecord } from '../store/monitor-flags.js';
import { latestRefitJob } from '../store/monitor-jobs.js';
import { loadPanelHistory, panelDataSignature } from '../store/panel-history.js';
import { loadPanelThresholds } from '../store/monitor-settings.js';
import { listQuarantined, type QuarantinedCell } from '../store/quarantine.js';

/** The refit status the pages show (the monitor pages' shape). */
export type RefitState = RefitStatusView;

export interface PanelContext {
  panel: PanelRow;
  /** Sessions in time order. */
  sessions: { label: string; date: string; importId: number | null }[];
  /** Every case, including those whose evidence no longer fires. */
  records: FlagRecord[];
  histories: Map<number, FlagHistoryEntry[]>;
  refit: RefitState;
  heldCells: QuarantinedCell[];
  /** Fits and indices of every session (read on first use). */
  history: () => PanelHistory;
  /** The panel's thresholds with defaults filled in (read on first use). */
  thresholds: () => PanelThresholds;
  sizingMemo: ChartSizingMemo;
}

/** The panel's thresholds with defaults filled in (stored ones were validated when saved). */
export function panelThresholds(db: Database, panelId: number): PanelThresholds {
  return validateThresholds(loadPanelThresholds(db, panelId)?.thresholds ?? {}).thresholds;
}

export class PanelNotFound extends Error {
  constructor(readonly panelName: string) {
    super(`No panel named "${panelName}".`);
    this.name = 'PanelNotFound';
  }
}

/**
 * Panel histories kept between requests, keyed by what they are read from (the sessions' data
 * versions, the events and the flag build), so pages do not re-parse a year of stored fits on
 * every request. Created by the caller (one per app), not a module-level cache.
 */
export interface HistoryMemo {
  entries: Map<number, { key: string; history: PanelHistory; derived: Map<string, unknown> }>;
  /** Chart sizings (limit widths, decision intervals): pure functions of the settings, kept across panels. */
  sizing: ChartSizingMemo;
}

/**
 * A value computed from a memoised history (charts of every assessor, say), kept with it and
 * dropped with it when the data changes. `name` must say everything else it depends on.
 */
export function derivedFromHistory<T>(memo: HistoryMemo, history: PanelHistory, name: string, compute: () => T): T {
  const entry = [...memo.entries.values()].find((e) => e.history === history);
  if (!entry) return compute();
  if (!entry.derived.has(name)) entry.derived.set(name, compute());
  return entry.derived.get(name) as T;
}

export function createHistoryMemo(): HistoryMemo {
  return { entries: new Map(), sizing: createChartSizingMemo() };
}

/**
 * The panel history through the memo: read again only when the sessions' data versions, the
 * events or the flag build changed. With ratings (the control-product page) it is kept apart.
 */
export function panelHistoryFor(db: Database, panelId: number, memo: HistoryMemo, options: { withRatings?: boolean } = {}): PanelHistory {
  const versions = listSessionVersions(db, panelId);
  const events = db.prepare('SELECT COUNT(*) AS n, IFNULL(MAX(id), 0) AS last FROM panel_event WHERE panel_id = ?').get(panelId) as { n: number; last: number };
  const key = `${panelDataSignature(versions)}|${events.n}|${events.last}|${loadFlagBuild(db, panelId)?.builtAt ?? ''}`;
  const slot = options.withRatings ? -panelId : panelId;
  const cached = memo.entries.get(slot);
  if (cached && cached.key === key) return cached.history;
  const history = loadPanelHistory(db, panelId, { withRatings: options.withRatings });
  memo.entries.set(slot, { key, history, derived: new Map() });
  return history;
}

export function loadPanelContext(db: Database, panelName: string, memo: HistoryMemo = createHistoryMemo()): PanelContext {
  const panel = findPanel(db, panelName);
  if (!panel) throw new PanelNotFound(panelName);
  const versions = listSessionVersions(db, panel.id);
  const imports = new Map(
    (db.prepare('SELECT label, import_id AS importId FROM session WHERE panel_id = ?').all(panel.id) as { label: string; importId: number | null }[]).map((r) => [
      r.label,
      r.importId,
    ]),
  );
  const history = (): PanelHistory => panelHistoryFor(db, panel.id, memo);
  return {
    panel,
    sessions: versions.map((s) => ({ label: s.label, date: s.date, importId: imports.get(s.label) ?? null })),
    records: listFlags(db, panel.id, { includeHistory: true }),
    histories: flagHistories(db, panel.id),
    refit: refitStatus(db, panel.id, versions),
    heldCells: listQuarantined(db, panel.name),
    history,
    thresholds: () => panelThresholds(db, panel.id),
    sizingMemo: memo.sizing,
  };
}

/** Where the panel's refit stands and whether the stored flags are older than the data. */
export function refitStatus(db: Database, panelId: number, versions = listSessionVersions(db, panelId)): RefitStatusView {
  const job = latestRefitJob(db, panelId);
  const build = loadFlagBuild(db, panelId);
  return {
    status: job?.status ?? null,
    nDone: job?.nDone ?? 0,
    nTasks: job?.nTasks ?? 0,
    message: job?.message ?? null,
    flagsBuiltAt: build?.builtAt ?? null,
    flagsBuiltAtText: build ? localTime(build.builtAt) : null,
    isStale: build?.dataSignature !== panelDataSignature(versions),
  };
}
