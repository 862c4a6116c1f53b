/**
 * Step 2 of a refit (server/refit.ts): the period windows kept, which of them changed, their warm
 * starts from the stored fits, and the period fits themselves (one worker task per window and
 * attribute). Reads and writes the store on the calling thread; the workers do the numbers.
 */
import type { Database } from 'better-sqlite3';
import type { SessionRatings, SessionVersionRow } from '../store/fits-sessions.js';
import { deletePeriodFitsExcept, loadPeriodFits, loadPeriodSignatures, savePeriodFit, type WindowSignature } from '../store/fits-results.js';
import { ANALYSIS_VERSION } from '../store/panel-history.js';
import { relativeSdsFromVariances } from '../analysis/lmm/fit-period-model.js';
import type { FitFailureLogger, RefitProgress } from './refit.js';
import type { FitRunner } from './fit-pool.js';
import type { PeriodFitResult, PeriodTask, RatedObservation } from './workers/fit-task-types.js';

/** A period model needs at least 3 sessions (methods notes §2.8, `short_period`). */
export const MIN_WINDOW_SESSIONS = 3;

/** What a stored period fit holds: the period task's result, or the sentence saying why there is none. */
import type { StoredPeriodResult } from '../domain/analysis.js';
export type { StoredPeriodResult };

/**
 * The period windows kept: consecutive blocks of `windowSessions` sessions (1–12, 13–24, …: the
 * history of product stability without overlap) plus the rolling window of the latest
 * `windowSessions` sessions (the current state). Every window has at least MIN_WINDOW_SESSIONS.
 * Fitting a window at every session would multiply the (costly) period fits by the window length
 * for little extra information, since overlapping windows share most of their data.
 */
export function periodWindows<T>(sessions: readonly T[], windowSessions: number): T[][] {
  const windows: T[][] = [];
  const n = sessions.length;
  for (let last = 0; last < n; last++) {
    const isBlockEnd = (last + 1) % windowSessions === 0;
    if (!isBlockEnd && last !== n - 1) continue;
    const window = sessions.slice(Math.max(0, last - windowSessions + 1), last + 1);
    if (window.length >= MIN_WINDOW_SESSIONS) windows.push(window);
  }
  return windows;
}

export interface PeriodRefitInput {
  panel: { id: number; name: string };
  sessions: readonly SessionVersionRow[];
  attributes: readonly { id: number; name: string; scale: PeriodTask['scale'] }[];
  ratingsOf: (session: SessionVersionRow) => SessionRatings;
  windowSessions: number;
  scope: 'stale' | 'all';
  runner: FitRunner;
  logger?: FitFailureLogger;
  onProgress?: (progress: RefitProgress) => void;
}

/** Fits the windows whose sessions or data versions differ from what their stored fit used; returns how many fits ran. */
export async function refitPeriodWindows(db: Database, input: PeriodRefitInput): Promise<number> {
  const { panel, sessions, attributes, windowSessions } = input;
  const windows = periodWindows(sessions, windowSessions);
  const stored = input.scope === 'all' ? new Map<string, string>() : loadPeriodSignatures(db, panel.id, windowSessions);
  const jobs: { attributeId: number; attribute: string; scale: PeriodTask['scale']; window: SessionVersionRow[]; signature: WindowSignature }[] = [];
  for (const window of windows) {
    const signature: WindowSignature = window.map((s) => [s.label, s.dataVersion]);
    const last = window[window.length - 1];
    for (const attribute of attributes) {
      if (stored.get(`${attribute.id}:${last.id}`) === `${ANALYSIS_VERSION}|${JSON.stringify(signature)}`) continue;
      jobs.push({ attributeId: attribute.id, attribute: attribute.name, scale: attribute.scale, window, signature });
    }
  }
  // Warm starts are read (only when something is to be fitted) before the windows that no longer
  // exist (the previous latest window) are deleted: that window's fit is the best start for the new latest window.
  const warmStarts = jobs.length > 0 ? storedStartValues(db, panel.id, windowSessions, sessions) : null;
  deletePeriodFitsExcept(db, panel.id, windowSessions, windows.map((w) => w[w.length - 1].id));
  let done = 0;
  await Promise.all(
    jobs.map(async (job) => {
      const first = job.window[0];
      const last = job.window[job.window.length - 1];
      const observations: RatedObservation[] = job.window.flatMap((s) => input.ratingsOf(s).byAttribute.get(job.attribute) ?? []);
      const result = await input.runner.run({
        type: 'period',
        attribute: job.attribute,
        scale: job.scale,
        sessions: job.window.map((s) => s.label),
        observations,
        ...warmStarts?.nearest(job.attribute, last),
      });
      if (result.failure) {
        const window = `${first.label} to ${last.label}`;
        input.logger?.error({ panel: panel.name, attribute: job.attribute, window, stack: result.failure.stack }, `period fit failed: ${result.failure.message}`);
      }
      savePeriodFit(db, panel.id, {
        attributeId: job.attributeId,
        windowSessions,
        firstSessionId: first.id,
        lastSessionId: last.id,
        sessions: job.signature,
        analysisVersion: ANALYSIS_VERSION,
        result: (result.result ?? { problem: result.problem ?? 'not fitted' }) satisfies StoredPeriodResult,
      });
      done += 1;
      input.onProgress?.({ phase: 'periods', done, total: jobs.length, label: `${job.attribute} @ ${last.label}` });
    }),
  );
  return jobs.length;
}

/**
 * Relative SDs θ = σ_term/σ_residual of the stored period fits, by attribute and last session,
 * and the nearest one for a window: the stored fit ending at the same session, else the one
 * ending at the latest session before it (the previous latest window after a new session).
 */
function storedStartValues(
  db: Database,
  panelId: number,
  windowSessions: number,
  sessions: readonly SessionVersionRow[],
): { nearest(attribute: string, last: SessionVersionRow): Pick<PeriodTask, 'startRelativeSds' | 'startReducedRelativeSds'> } {
  const order = new Map(sessions.map((s, i) => [s.label, i]));
  type Start = { lastIndex: number; relativeSds: Record<string, number>; reduced: Record<string, number> | null };
  const byAttribute = new Map<string, Start[]>();
  for (const stored of loadPeriodFits(db, panelId)) {
    if (stored.windowSessions !== windowSessions) continue;
    const result = stored.result;
    const lastIndex = order.get(stored.lastSession);
    if ('problem' in result || lastIndex === undefined) continue;
    const relativeSds = relativeSdsFromVariances(result.json.variance);
    if (!relativeSds) continue;
    let list = byAttribute.get(stored.attribute);
    if (!list) byAttribute.set(stored.attribute, (list = []));
    list.push({ lastIndex, relativeSds, reduced: result.reducedRelativeSds ?? null });
  }
  return {
    nearest(attribute, last) {
      const target = order.get(last.label);
      let best: Start | null = null;
      for (const candidate of byAttribute.get(attribute) ?? []) {
        if (target === undefined || candidate.lastIndex > target) continue;
        if (!best || candidate.lastIndex > best.lastIndex) best = candidate;
      }
      // A stored fit more than a window away shares no data with this window.
      if (!best || target! - best.lastIndex >= windowSessions) return {};
      return { startRelativeSds: best.relativeSds, startReducedRelativeSds: best.reduced };
    },
  };
}
