/**
 * Refit plumbing: what is recomputed after an import, and what is stored with which data version.
 * The runner here is a recording test double (the numbers are checked in the analysis suites);
 * these tests check the bookkeeping: which sessions, which windows, when the flags are rebuilt.
 */
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import type { Database } from 'better-sqlite3';
import type { FitJson } from '../../domain/analysis.js';
import type { FitRunner } from '../../server/fit-pool.js';
import { DEFAULT_WINDOW_SESSIONS, panelDataSignature, refitPanel, rollingWindows, RefitService } from '../../server/refit.js';
import type { FitTask, FitTaskResult } from '../../server/workers/fit-task-types.js';
import { findPanel, listSessionVersions } from '../../store/fits-sessions.js';
import { loadPeriodFits, loadSessionFits } from '../../store/fits-results.js';
import { listFlags, loadFlagBuild } from '../../store/monitor-flags.js';
import { savePanelThresholds } from '../../store/monitor-settings.js';
import { countingRunner, importRatings, makeTestStore, smallPanel } from './helpers.js';

/** Records n and the mean of what it was given; one watch flag per stored session count. */
function recordingRunner(): FitRunner {
  return {
    mode: 'in-thread',
    threads: 0,
    async run<T extends FitTask>(task: T): Promise<FitTaskResult<T>> {
      if (task.type === 'session') {
        return {
          session: task.session,
          attributes: task.attributes.map((a) => ({
            attribute: a.attribute,
            fit: { session: task.session, attribute: a.attribute, model: 'session', n: a.observations.length } as FitJson,
            diagnostics: { mean: a.observations.reduce((s, o) => s + o.value, 0) / a.observations.length },
            indices: [],
            problem: null,
          })),
          findings: [],
        } as FitTaskResult<T>;
      }
      if (task.type === 'period') {
        return { attribute: task.attribute, result: { n: task.observations.length, sessions: task.sessions }, problem: null } as FitTaskResult<T>;
      }
      const last = task.snapshot.sessions[task.snapshot.sessions.length - 1];
      return {
        flags: [
          {
            kind: 'drift',
            assessor: 'A01',
            product: null,
            attribute: null,
            firstSession: last.label,
            severity: 'watch',
            evidence: { test: 'recording double', n: task.snapshot.sessions.length, threshold: 'none' },
            message: 'Recorded.',
          },
        ],
      } as FitTaskResult<T>;
    },
    close: async () => undefined,
  };
}

let db: Database;
beforeEach(() => {
  db = makeTestStore();
});
afterEach(() => db.close());

describe('rollingWindows', () => {
  it('ends a window at every session from the third, at most windowSessions long', () => {
    const labels = Array.from({ length: 15 }, (_, i) => `S${i + 1}`);
    const windows = rollingWindows(labels, 12);
    expect(windows).toHaveLength(13);
    expect(windows[0]).toEqual(['S1', 'S2', 'S3']);
    expect(windows[12]).toEqual(labels.slice(3, 15));
    expect(windows.every((w) => w.length <= 12 && w.length >= 3)).toBe(true);
  });
});

describe('refitPanel', () => {
  it('stores fits of every session with the data version they came from, then rebuilds flags', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    const runner = countingRunner(recordingRunner());
    const summary = await refitPanel(db, panel.panelName, { runner });
    const panelId = findPanel(db, panel.panelName)!.id;
    const sessions = listSessionVersions(db, panelId);
    expect(summary.sessionsRefitted).toEqual(sessions.map((s) => s.label));
    const fits = loadSessionFits(db, panelId);
    expect(fits).toHaveLength(sessions.length * 3);
    for (const fit of fits) {
      const session = sessions.find((s) => s.label === fit.session)!;
      expect(fit.dataVersion).toBe(session.dataVersion);
      const expectedN = panel.ratings.filter((r) => r.session === fit.session && r.attribute === fit.attribute).length;
      expect(fit.fit.n).toBe(expectedN);
    }
    // 6 sessions → windows ending at sessions 3..6, for 3 attributes.
    expect(runner.counts.period).toBe(4 * 3);
    expect(loadPeriodFits(db, panelId)).toHaveLength(12);
    expect(runner.counts.flags).toBe(1);
    expect(loadFlagBuild(db, panelId)?.dataSignature).toBe(panelDataSignature(sessions));
    expect(listFlags(db, panelId).map((f) => f.flag.firstSession)).toEqual([sessions[5].label]);
  });

  it('does nothing after a re-import of unchanged data', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    await refitPanel(db, panel.panelName, { runner: recordingRunner() });
    const again = await importRatings(db, panel);
    expect(again.changedSessions).toEqual([]);
    const runner = countingRunner(recordingRunner());
    const summary = await refitPanel(db, panel.panelName, { runner });
    expect(runner.counts).toEqual({ session: 0, period: 0, flags: 0 });
    expect(summary.flagsRebuilt).toBe(false);
  });

  it('refits a changed session and exactly the period windows that contain it', async () => {
    const panel = smallPanel({ nWeeks: 16 });
    await importRatings(db, panel);
    await refitPanel(db, panel.panelName, { runner: recordingRunner() });
    const panelId = findPanel(db, panel.panelName)!.id;
    const before = listSessionVersions(db, panelId);
    // Change one value of the 4th session and import that session again.
    const target = before[3].label;
    const changed = panel.ratings
      .filter((r) => r.session === target)
      .map((r, i) => (i === 0 ? { ...r, value: r.value === 5 ? 6 : 5 } : r));
    const report = await importRatings(db, panel, changed);
    expect(report.changedSessions).toEqual([target]);
    const runner = countingRunner(recordingRunner());
    const summary = await refitPanel(db, panel.panelName, { runner });
    expect(runner.sessions).toEqual([target]);
    expect(summary.sessionsRefitted).toEqual([target]);
    // Windows ending at sessions 4..15 (0-based 3..14) contain session index 3 (window of 12).
    const lastLabels = before.slice(3, 3 + DEFAULT_WINDOW_SESSIONS).map((s) => s.label);
    const expectedWindows = panel.attributes.flatMap((a) => lastLabels.map((l) => `${a.name}@${l}`)).sort();
    expect([...runner.windows].sort()).toEqual(expectedWindows);
    expect(runner.counts.flags).toBe(1);
    const after = listSessionVersions(db, panelId);
    const newVersion = after.find((s) => s.label === target)!.dataVersion;
    expect(newVersion).toBeGreaterThan(before[3].dataVersion);
    for (const fit of loadSessionFits(db, panelId).filter((f) => f.session === target)) expect(fit.dataVersion).toBe(newVersion);
    const window = loadPeriodFits(db, panelId).find((p) => p.lastSession === lastLabels[0])!;
    expect(window.sessions.find(([label]) => label === target)?.[1]).toBe(newVersion);
  });

  it('rebuilds flags (only) when the thresholds change', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    await refitPanel(db, panel.panelName, { runner: recordingRunner() });
    savePanelThresholds(db, findPanel(db, panel.panelName)!.id, { example: 1 });
    const runner = countingRunner(recordingRunner());
    await refitPanel(db, panel.panelName, { runner });
    expect(runner.counts).toEqual({ session: 0, period: 0, flags: 1 });
  });

  it("scope 'all' recomputes everything", async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    await refitPanel(db, panel.panelName, { runner: recordingRunner() });
    const runner = countingRunner(recordingRunner());
    await refitPanel(db, panel.panelName, { runner, scope: 'all' });
    expect(runner.counts).toEqual({ session: 6, period: 12, flags: 1 });
  });
});

describe('RefitService', () => {
  it('returns a queued job at once and records its progress until done', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    const service = new RefitService(db, recordingRunner());
    const job = service.schedule(panel.panelName, 'import');
    expect(job.status).toBe('queued');
    expect(service.schedule(panel.panelName, 'import').id).toBe(job.id);
    await service.whenIdle();
    const done = service.job(job.id)!;
    expect(done.status).toBe('done');
    expect(done.nDone).toBe(done.nTasks);
    expect(done.finishedAt).not.toBeNull();
  });

  it('records a failed job with a plain message and keeps earlier results', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    const failing: FitRunner = { ...recordingRunner(), run: async () => Promise.reject(new Error('boom at /some/path')) };
    const errors: unknown[] = [];
    const service = new RefitService(db, failing, { onError: (e) => errors.push(e) });
    const job = service.schedule(panel.panelName, 'import');
    await service.whenIdle();
    const failed = service.job(job.id)!;
    expect(failed.status).toBe('failed');
    expect(failed.message).not.toMatch(/\/some\/path|boom/);
    expect(errors).toHaveLength(1);
  });
});
