/**
 * Refit orchestration (issue 4, "fits kept, not recomputed"). After an import, or on demand:
 * 1. sessions whose stored results are missing or older than the session's data version are
 *    fitted again (fits, per-assessor indices, data-quality findings), one worker task each;
 * 2. period fits of the rolling windows whose sessions or versions changed are fitted again;
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
import {
  deletePeriodFitsExcept,
  loadPeriodFits,
  loadPeriodSignatures,
  loadSessionFits,
  loadSessionIndices,
  loadSessionQuality,
  savePeriodFit,
  saveSessionResults,
  type WindowSignature,
} from '../store/fits-results.js';
import { loadFlagBuild, replaceCurrentFlags } from '../store/monitor-flags.js';
import { listPanelEvents } from '../store/monitor-events.js';
import { loadPanelThresholds } from '../store/monitor-settings.js';
import { createRefitJob, getRefitJob, markRefitJob, type RefitJob } from '../store/monitor-jobs.js';
import type { FitRunner } from './fit-pool.js';
import type { PanelSnapshot, RatedObservation } from './workers/fit-task-types.js';

/** Recorded with every stored result; bump when a change in analysis/ changes stored numbers. */
export const ANALYSIS_VERSION = 'analysis-1';

/** Default rolling window of the period model: the last 12 sessions (issue 4 §3). */
export const DEFAULT_WINDOW_SESSIONS = 12;
/** A period model needs at least 3 sessions (methods notes §2.8, `short_period`). */
export const MIN_WINDOW_SESSIONS = 3;

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

export interface RefitOptions {
  runner: FitRunner;
  /** 'stale' (default): only what changed; 'all': every session, window and the flags. */
  scope?: 'stale' | 'all';
  windowSessions?: number;
  onProgress?: (progress: RefitProgress) => void;
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

/** Windows of consecutive sessions ending at each session, at most `windowSessions` long, at least MIN_WINDOW_SESSIONS. */
export function rollingWindows<T>(sessions: readonly T[], windowSessions: number): T[][] {
  const windows: T[][] = [];
  for (let last = MIN_WINDOW_SESSIONS - 1; last < sessions.length; last++) {
    windows.push(sessions.slice(Math.max(0, last - windowSessions + 1), last + 1));
  }
  return windows;
}

/** What the whole panel's stored results depend on: every session label with its data version. */
export function panelDataSignature(sessions: readonly { label: string; dataVersion: number }[]): string {
  const text = `${ANALYSIS_VERSION}\n${sessions.map((s) => `${s.label}\t${s.dataVersion}`).join('\n')}`;
  return createHash('sha256').update(text).digest('hex').slice(0, 32);
}

function hashJson(value: unknown): string {
  return createHash('sha256').update(JSON.stringify(value ?? null)).digest('hex').slice(0, 32);
}

export async function refitPanel(db: Database, panelName: string, options: RefitOptions): Promise<RefitSummary> {
  const startedMs = performance.now();
  const panel = findPanel(db, panelName);
  if (!panel) throw new PanelNotFoundError(panelName);
  const windowSessions = options.windowSessions ?? DEFAULT_WINDOW_SESSIONS;
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
  const windows = rollingWindows(sessions, windowSessions);
  deletePeriodFitsExcept(db, panel.id, windowSessions, windows.map((w) => w[w.length - 1].id));
  const stored = options.scope === 'all' ? new Map<string, string>() : loadPeriodSignatures(db, panel.id, windowSessions);
  const periodJobs: { attributeId: number; attribute: string; window: SessionVersionRow[]; signature: WindowSignature }[] = [];
  for (const window of windows) {
    const signature: WindowSignature = window.map((s) => [s.label, s.dataVersion]);
    const last = window[window.length - 1];
    for (const attribute of attributes) {
      if (stored.get(`${attribute.id}:${last.id}`) === `${ANALYSIS_VERSION}|${JSON.stringify(signature)}`) continue;
      periodJobs.push({ attributeId: attribute.id, attribute: attribute.name, window, signature });
    }
  }
  let periodsDone = 0;
  await Promise.all(
    periodJobs.map(async (job) => {
      const observations: RatedObservation[] = job.window.flatMap((s) => ratingsOf(s).byAttribute.get(job.attribute) ?? []);
      const result = await options.runner.run({
        type: 'period',
        attribute: job.attribute,
        scale: scaleOf.get(job.attribute)!,
        sessions: job.window.map((s) => s.label),
        observations,
      });
      savePeriodFit(db, panel.id, {
        attributeId: job.attributeId,
        windowSessions,
        firstSessionId: job.window[0].id,
        lastSessionId: job.window[job.window.length - 1].id,
        sessions: job.signature,
        analysisVersion: ANALYSIS_VERSION,
        result: result.problem ? { problem: result.problem, fit: result.result } : result.result,
      });
      periodsDone += 1;
      options.onProgress?.({
        phase: 'periods',
        done: periodsDone,
        total: periodJobs.length,
        label: `${job.attribute} @ ${job.window[job.window.length - 1].label}`,
      });
    }),
  );

  // 3. Flags, when the data, the thresholds or the stored results changed.
  const dataSignature = panelDataSignature(sessions);
  const thresholds = loadPanelThresholds(db, panel.id)?.thresholds ?? null;
  const thresholdsHash = hashJson(thresholds);
  const lastBuild = loadFlagBuild(db, panel.id);
  const needFlags =
    options.scope === 'all' ||
    targets.length > 0 ||
    periodJobs.length > 0 ||
    lastBuild?.dataSignature !== dataSignature ||
    lastBuild?.thresholdsHash !== thresholdsHash;
  let nFlags = lastBuild?.nFlags ?? 0;
  if (needFlags) {
    const snapshot = buildPanelSnapshot(db, panel.id, panel.name, windowSessions);
    const { flags } = await options.runner.run({ type: 'flags', snapshot, thresholds });
    replaceCurrentFlags(db, panel.id, flags, { dataSignature, thresholdsHash });
    nFlags = flags.length;
    options.onProgress?.({ phase: 'flags', done: 1, total: 1, label: 'flags' });
  }
  return {
    panel: panel.name,
    sessionsRefitted: targets.map((s) => s.label),
    periodFitsRefitted: periodJobs.length,
    flagsRebuilt: needFlags,
    nFlags,
    dataSignature,
    durationMs: performance.now() - startedMs,
  };
}

/** Everything the flag engine reads, from the store, as one structured-clone-safe object. */
export function buildPanelSnapshot(db: Database, panelId: number, panelName: string, windowSessions = DEFAULT_WINDOW_SESSIONS): PanelSnapshot {
  return {
    panel: panelName,
    sessions: listSessionVersions(db, panelId).map((s) => ({ label: s.label, date: s.date, dataVersion: s.dataVersion })),
    attributes: listAttributes(db, panelId).map((a) => ({ name: a.name, scale: a.scale })),
    referenceProducts: listProducts(db, panelId)
      .filter((p) => p.role === 'reference')
      .map((p) => p.code),
    fits: loadSessionFits(db, panelId).map((f) => f.fit),
    indices: loadSessionIndices(db, panelId),
    quality: loadSessionQuality(db, panelId).map((q) => ({ session: q.session, findings: q.findings })),
    periodFits: loadPeriodFits(db, panelId)
      .filter((p) => p.windowSessions === windowSessions)
      .map((p) => ({
        attribute: p.attribute,
        firstSession: p.firstSession,
        lastSession: p.lastSession,
        sessions: p.sessions.map(([label]) => label),
        result: p.result,
      })),
    events: listPanelEvents(db, panelId).map((e) => ({ kind: e.kind, session: e.session, assessor: e.assessor })),
  };
}

/**
 * Background refits for the service: one job at a time (a queue), jobs recorded in the store
 * so their status can be shown; a request that starts one returns at once with the job.
 */
export class RefitService {
  private chain: Promise<void> = Promise.resolve();
  private readonly pending = new Map<number, number>(); // panelId → queued job id

  constructor(
    private readonly db: Database,
    private readonly runner: FitRunner,
    private readonly options: { windowSessions?: number; onError?: (error: unknown, job: RefitJob) => void } = {},
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
        windowSessions: this.options.windowSessions,
        onProgress: (p) => markRefitJob(this.db, jobId, { nTasks: p.total, nDone: p.done, message: `${p.phase}: ${p.label}` }),
      });
      markRefitJob(this.db, jobId, {
        status: 'done',
        message: `${summary.sessionsRefitted.length} sessions and ${summary.periodFitsRefitted} period fits refitted; ${summary.nFlags} flags.`,
      });
    } catch (error) {
      markRefitJob(this.db, jobId, { status: 'failed', message: 'The refit failed; the previous results are kept.' });
      this.options.onError?.(error, getRefitJob(this.db, jobId)!);
    }
  }
}
