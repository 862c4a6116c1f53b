/**
 * Refit orchestration (fits are stored, not recomputed: docs/decisions/0007-fits-stored-not-recomputed.md). After an import, or on demand:
 * 1. sessions whose stored results are missing or older than the session's data version are
 *    fitted again (fits, per-assessor indices, data-quality findings), one worker task each;
 * 2. period fits of the windows (see periodWindows) whose sessions or versions changed are fitted again;
 * 3. the flag set is rebuilt from everything stored, when anything it reads has changed.
 * The workers do the numbers; this module reads and writes the store on the calling thread.
 */
import { createHash } from 'node:crypto';
import type { Database } from 'better-sqlite3';
import {
  findPanel,
  listAttributes,
  listProducts,
  listSessionVersions,
  listStaleSessions,
  loadSessionRatings,
  type SessionRatings,
  type SessionVersionRow,
} from '../store/fits-sessions.js';
import { saveSessionResults } from '../store/fits-results.js';
import { closeFlagsByKey, loadFlagBuild, replaceCurrentFlags } from '../store/monitor-flags.js';
import { ANALYSIS_VERSION, createHistoryReadMemo, DEFAULT_WINDOW_SESSIONS, loadPackedRatings, loadPanelHistory, panelDataSignature, type HistoryReadMemo } from '../store/panel-history.js';

// The read model moved to the store; these names stay importable from here for the refit's callers.
export { ANALYSIS_VERSION, DEFAULT_WINDOW_SESSIONS, loadPanelHistory, panelDataSignature } from '../store/panel-history.js';
import { listPanelEvents, listRetraining, syncRetrainingEvents, updateRetraining } from '../store/monitor-events.js';
import { loadPanelThresholds } from '../store/monitor-settings.js';
import { createRefitJob, getRefitJob, markRefitJob, type RefitJob } from '../store/monitor-jobs.js';
import { refitPeriodWindows } from './refit-periods.js';

// The period step lives in refit-periods.ts; these names stay importable from here.
export { MIN_WINDOW_SESSIONS, periodWindows, type StoredPeriodResult } from './refit-periods.js';
import type { FitRunner } from './fit-pool.js';
import type { RetrainingToEvaluate } from './workers/fit-task-types.js';


export class PanelNotFoundError extends Error {
  constructor(readonly panelName: string) {
    super(`No panel named "${panelName}" in this store.`);
    this.name = 'PanelNotFoundError';
  }
}

export interface RefitProgress {
  phase: 'sessions' | 'periods' | 'flags';
  done: number;
  total: number;
  /** What was just finished: a session label, "attribute @ last session", or "flags". */
  label: string;
}

/** Where unexpected fit errors are reported (pino's logger fits; the CLI writes to stderr). */
export interface FitFailureLogger {
  error(details: Record<string, unknown>, message: string): void;
}

export interface RefitOptions {
  runner: FitRunner;
  /**
   * Receives each fit that failed for an unexpected reason (a fault of the program), with its
   * stack, at error level. Data that cannot be fitted are stored as a sentence and not logged.
   */
  logger?: FitFailureLogger;
  /** 'stale' (default): only what changed; 'all': every session, window and the flags. */
  scope?: 'stale' | 'all';
  windowSessions?: number;
  onProgress?: (progress: RefitProgress) => void;
  /**
   * Build the flags on this thread instead of in a worker. A worker needs the panel history
   * cloned to it (a year: about 4 MB of objects, mostly the index rows; the clone costs about as
   * much as building the flags), but keeps this thread free: worth it for one-shot commands,
   * where nothing else waits on this thread; not for the service, whose requests do.
   */
  flagsOnCallingThread?: boolean;
  /**
   * What the flag build read last time (kept by the caller between refits): with it, the history
   * and ratings are read incrementally (parsed results and unchanged sessions reused).
   */
  readMemo?: HistoryReadMemo;
}

export interface RefitSummary {
  panel: string;
  sessionsRefitted: string[];
  periodFitsRefitted: number;
  flagsRebuilt: boolean;
  nFlags: number;
  dataSignature: string;
  durationMs: number;
}

function hashJson(value: unknown): string {
  return createHash('sha256').update(JSON.stringify(value ?? null)).digest('hex').slice(0, 32);
}

export async function refitPanel(db: Database, panelName: string, options: RefitOptions): Promise<RefitSummary> {
  const startedMs = performance.now();
  const panel = findPanel(db, panelName);
  if (!panel) throw new PanelNotFoundError(panelName);
  const windowSessions = options.windowSessions ?? DEFAULT_WINDOW_SESSIONS;
  // A retraining recorded as done before its first session existed gets its event now.
  syncRetrainingEvents(db, panel.id);
  const sessions = listSessionVersions(db, panel.id);
  const attributes = listAttributes(db, panel.id);
  const scaleOf = new Map(attributes.map((a) => [a.name, a.scale]));
  const attributeIdOf = new Map(attributes.map((a) => [a.name, a.id]));
  const referenceProducts = listProducts(db, panel.id)
    .filter((p) => p.role === 'reference')
    .map((p) => p.code);

  const ratingsCache = new Map<number, SessionRatings>();
  const ratingsOf = (session: SessionVersionRow): SessionRatings => {
    let cached = ratingsCache.get(session.id);
    if (!cached) ratingsCache.set(session.id, (cached = loadSessionRatings(db, session)));
    return cached;
  };

  // 1. Sessions.
  const targets = options.scope === 'all' ? sessions : listStaleSessions(db, panel.id, ANALYSIS_VERSION);
  let sessionsDone = 0;
  await Promise.all(
    targets.map(async (session) => {
      const ratings = ratingsOf(session);
      const result = await options.runner.run({
        type: 'session',
        session: session.label,
        sessionDate: session.date,
        attributes: [...ratings.byAttribute].map(([attribute, observations]) => ({
          attribute,
          scale: scaleOf.get(attribute)!,
          observations,
        })),
        referenceProducts,
      });
      for (const a of result.attributes) {
        if (a.failure) options.logger?.error({ panel: panel.name, session: session.label, attribute: a.attribute, stack: a.failure.stack }, `session fit failed: ${a.failure.message}`);
      }
      saveSessionResults(db, {
        sessionId: session.id,
        dataVersion: session.dataVersion,
        analysisVersion: ANALYSIS_VERSION,
        attributes: result.attributes.map((a) => ({
          attributeId: attributeIdOf.get(a.attribute)!,
          fit: a.fit,
          diagnostics: a.problem ? { ...(a.diagnostics as object | null), problem: a.problem } : a.diagnostics,
          indices: a.indices,
        })),
        findings: result.findings,
      });
      sessionsDone += 1;
      options.onProgress?.({ phase: 'sessions', done: sessionsDone, total: targets.length, label: session.label });
    }),
  );

  // 2. Period windows whose sessions or data versions differ from what the stored fit used.
  const periodFitsRefitted = await refitPeriodWindows(db, {
    panel,
    sessions,
    attributes,
    ratingsOf,
    windowSessions,
    scope: options.scope ?? 'stale',
    runner: options.runner,
    logger: options.logger,
    onProgress: options.onProgress,
  });

  // 3. Flags (and the retraining evaluations), when anything they read has changed: the data,
  //    the thresholds, the events (baseline restarts) or the retraining records.
  const dataSignature = panelDataSignature(sessions);
  const thresholds = loadPanelThresholds(db, panel.id)?.thresholds ?? null;
  const retrainingDone = retrainingToEvaluate(db, panel.id, sessions);
  const inputsHash = hashJson({
    thresholds,
    events: listPanelEvents(db, panel.id).map((e) => [e.kind, e.session, e.untilSession, e.assessor]),
    retraining: retrainingDone,
  });
  const lastBuild = loadFlagBuild(db, panel.id);
  const needFlags =
    options.scope === 'all' ||
    targets.length > 0 ||
    periodFitsRefitted > 0 ||
    lastBuild?.dataSignature !== dataSignature ||
    lastBuild?.thresholdsHash !== inputsHash;
  let nFlags = lastBuild?.nFlags ?? 0;
  if (needFlags) {
    const readMemo = options.readMemo ?? createHistoryReadMemo();
    const history = loadPanelHistory(db, panel.id, { windowSessions, memo: readMemo });
    const ratings = loadPackedRatings(db, panel.id, readMemo);
    const task = { type: 'flags' as const, history, ratings, thresholds, retraining: retrainingDone };
    // Loaded only here: the flag engine is the worker's code, not needed otherwise on this thread.
    const result = options.flagsOnCallingThread ? (await import('./workers/fit-tasks.js')).runFlagsTask(task) : await options.runner.run(task);
    replaceCurrentFlags(db, panel.id, result.flags, { dataSignature, thresholdsHash: inputsHash });
    const linkedKeys = new Map(listRetraining(db, panel.id).map((r) => [r.id, r.flagKeys]));
    for (const { id, evaluation } of result.retraining) {
      updateRetraining(db, panel.id, id, { outcome: evaluation });
      if (evaluation.decision === 'close') closeFlagsByKey(db, panel.id, linkedKeys.get(id) ?? [], evaluation.message);
    }
    nFlags = result.flags.length;
    options.onProgress?.({ phase: 'flags', done: 1, total: 1, label: 'flags' });
  }
  return {
    panel: panel.name,
    sessionsRefitted: targets.map((s) => s.label),
    periodFitsRefitted,
    flagsRebuilt: needFlags,
    nFlags,
    dataSignature,
    durationMs: performance.now() - startedMs,
  };
}

/**
 * Retraining records marked done, with the first session on or after their date (the sessions
 * from there on are "after"). Records whose date is after the last session wait for data.
 */
function retrainingToEvaluate(db: Database, panelId: number, sessions: readonly SessionVersionRow[]): RetrainingToEvaluate[] {
  return listRetraining(db, panelId).flatMap((r) => {
    if (r.status !== 'done') return [];
    const first = sessions.find((s) => s.date >= r.date);
    return first ? [{ id: r.id, assessor: r.assessor, eventSession: first.label }] : [];
  });
}



/**
 * Background refits for the service: one job at a time (a queue), jobs recorded in the store
 * so their status can be shown; a request that starts one returns at once with the job.
 */
export class RefitService {
  private chain: Promise<void> = Promise.resolve();
  private readonly pending = new Map<number, number>(); // panelId → queued job id
  /** Kept between jobs: the flag build of the next refit reads only what changed. */
  private readonly readMemo = createHistoryReadMemo();

  constructor(
    private readonly db: Database,
    private readonly runner: FitRunner,
    private readonly options: {
      windowSessions?: number;
      onError?: (error: unknown, job: RefitJob) => void;
      logger?: FitFailureLogger;
      /** After a refit is stored: e.g. prepare the pages that read it, so the first visit is fast. */
      afterRefit?: (panelName: string) => Promise<void>;
    } = {},
  ) {}

  /** Queue a refit of what changed in the panel; a job already queued for it is reused. */
  schedule(panelName: string, reason: string): RefitJob {
    const panel = findPanel(this.db, panelName);
    if (!panel) throw new PanelNotFoundError(panelName);
    const queued = this.pending.get(panel.id);
    if (queued !== undefined) return getRefitJob(this.db, queued)!;
    const jobId = createRefitJob(this.db, panel.id, reason);
    this.pending.set(panel.id, jobId);
    this.chain = this.chain.then(() => this.runJob(jobId, panel.id, panelName));
    return getRefitJob(this.db, jobId)!;
  }

  /** 'worker-threads' when fits run in the piscina pool. */
  get runnerMode(): FitRunner['mode'] {
    return this.runner.mode;
  }

  job(jobId: number): RefitJob | null {
    return getRefitJob(this.db, jobId);
  }

  /** Resolves when every queued job has finished (tests, shutdown). */
  async whenIdle(): Promise<void> {
    let seen: Promise<void>;
    do {
      seen = this.chain;
      await seen;
    } while (seen !== this.chain);
  }

  private async runJob(jobId: number, panelId: number, panelName: string): Promise<void> {
    this.pending.delete(panelId);
    markRefitJob(this.db, jobId, { status: 'running' });
    try {
      const summary = await refitPanel(this.db, panelName, {
        runner: this.runner,
        logger: this.options.logger,
        windowSessions: this.options.windowSessions,
        readMemo: this.readMemo,
        onProgress: (p) => markRefitJob(this.db, jobId, { nTasks: p.total, nDone: p.done, message: `${p.phase}: ${p.label}` }),
      });
      markRefitJob(this.db, jobId, {
        status: 'done',
        message: `${summary.sessionsRefitted.length} sessions and ${summary.periodFitsRefitted} period fits refitted; ${summary.nFlags} flags.`,
      });
    } catch (error) {
      markRefitJob(this.db, jobId, { status: 'failed', message: 'The refit failed; the previous results are kept.' });
      this.options.onError?.(error, getRefitJob(this.db, jobId)!);
      return;
    }
    try {
      await this.options.afterRefit?.(panelName);
    } catch {
      // preparing pages is an optimisation: a failure here only makes the next visit slower
    }
  }
}
