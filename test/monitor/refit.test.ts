/**
 * Refit plumbing: what is recomputed after an import, and what is stored with which data version.
 * The numbers themselves are checked against R in the analysis suites; here the stored results
 * are compared with direct calls of the same analysis functions on the same ratings.
 */
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import type { Database } from 'better-sqlite3';
import { computeAssessorIndices } from '../../analysis/indices/compute-assessor-indices.js';
import { fitSessionModel } from '../../analysis/lmm/fit-session-model.js';
import { fitPeriodModel } from '../../analysis/lmm/fit-period-model.js';
import type { FitTask, FitTaskResult, PeriodFitResult, PeriodTask } from '../../server/workers/fit-task-types.js';
import { CRITERION_OPTIMUM_ABSOLUTE, LIKELIHOOD_RATIO_ABSOLUTE, VARIANCE_RELATIVE } from '../helpers/tolerances.js';
import { createFitPool, type FitRunner } from '../../server/fit-pool.js';
import { panelDataSignature, periodWindows, refitPanel, RefitService } from '../../server/refit.js';
import { findPanel, listSessionVersions, unpackRatings } from '../../store/fits-sessions.js';
import { loadPackedRatings } from '../../store/panel-history.js';
import type { Rating } from '../../domain/ratings.js';
import { loadPeriodFits, loadSessionFits, loadSessionIndices } from '../../store/fits-results.js';
import { listFlags, loadFlagBuild } from '../../store/monitor-flags.js';
import { savePanelThresholds } from '../../store/monitor-settings.js';
import { countingRunner, importRatings, makeTestStore, smallPanel } from './helpers.js';

/** A runner whose every task fails (a bug in analysis, a worker crash). */
function failingRunner(): FitRunner {
  return { mode: 'in-thread', threads: 0, run: async () => Promise.reject(new Error('boom at /some/path')), close: async () => undefined };
}

const inThread = () => createFitPool({ mode: 'in-thread' });
const bookkeeping = () => countingRunner(inThread(), { skipPeriodFits: true });

let db: Database;
beforeEach(() => {
  db = makeTestStore();
});
afterEach(() => db.close());

describe('periodWindows', () => {
  const labels = (n: number) => Array.from({ length: n }, (_, i) => i + 1);
  it('keeps blocks of 12 and the latest 12 sessions', () => {
    expect(periodWindows(labels(15), 12).map((w) => [w[0], w[w.length - 1]])).toEqual([
      [1, 12],
      [4, 15],
    ]);
    expect(periodWindows(labels(26), 12).map((w) => [w[0], w[w.length - 1]])).toEqual([
      [1, 12],
      [13, 24],
      [15, 26],
    ]);
  });
  it('does not repeat a block that is also the latest window, and needs 3 sessions', () => {
    expect(periodWindows(labels(24), 12)).toHaveLength(2);
    expect(periodWindows(labels(5), 12)).toEqual([[1, 2, 3, 4, 5]]);
    expect(periodWindows(labels(2), 12)).toEqual([]);
  });
});

describe('packed ratings', () => {
  it('unpack(pack(stored ratings)) gives back exactly the imported ratings', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    const packed = loadPackedRatings(db, findPanel(db, panel.panelName)!.id);
    expect(packed.value).toBeInstanceOf(Float64Array);
    const key = (r: Rating) => [r.session, r.attribute, r.assessor, r.product, r.replicate].join('|');
    const sorted = (rs: Rating[]) => [...rs].sort((a, b) => key(a).localeCompare(key(b)));
    expect(sorted(unpackRatings(packed))).toEqual(sorted(panel.ratings));
  });
});

describe('refitPanel', () => {
  it('stores fits, indices and period fits with the data versions they came from, then the flags', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    const runner = countingRunner(inThread());
    const summary = await refitPanel(db, panel.panelName, { runner });
    const panelId = findPanel(db, panel.panelName)!.id;
    const sessions = listSessionVersions(db, panelId);
    expect(summary.sessionsRefitted).toEqual(sessions.map((s) => s.label));
    const fits = loadSessionFits(db, panelId);
    expect(fits).toHaveLength(sessions.length * panel.attributes.length);
    const indices = loadSessionIndices(db, panelId);
    for (const fit of fits) {
      expect(fit.dataVersion).toBe(sessions.find((s) => s.label === fit.session)!.dataVersion);
      const ratings = panel.ratings.filter((r) => r.session === fit.session && r.attribute === fit.attribute);
      const direct = fitSessionModel(ratings);
      // Through JSON, as stored (a boundary fit's BLUPs of −0 come back as 0).
      expect(fit.fit).toEqual(JSON.parse(JSON.stringify(direct.json)));
      expect(indices.filter((ix) => ix.session === fit.session && ix.attribute === fit.attribute)).toEqual(
        computeAssessorIndices(ratings, { panelProductPValue: direct.json.productTest.p }),
      );
    }
    // 6 sessions: one window (the latest six) per attribute, with the product:session test.
    const periods = loadPeriodFits(db, panelId);
    expect(periods.map((p) => [p.attribute, p.firstSession, p.lastSession])).toEqual(
      panel.attributes.map((a) => [a.name, sessions[0].label, sessions[5].label]).sort(),
    );
    for (const p of periods) {
      const result = p.result as { json: { n: number; model: string }; lrt: { pValue: number } };
      expect(result.json.model).toBe('period');
      expect(result.json.n).toBe(panel.ratings.filter((r) => r.attribute === p.attribute).length);
      expect(result.lrt.pValue).toBeGreaterThan(0);
      expect(p.sessions).toEqual(sessions.map((s) => [s.label, s.dataVersion]));
    }
    expect(runner.counts.flags).toBe(1);
    expect(loadFlagBuild(db, panelId)?.dataSignature).toBe(panelDataSignature(sessions));
    expect(listFlags(db, panelId)).toHaveLength(summary.nFlags);
  });

  it('does nothing after a re-import of unchanged data', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    await refitPanel(db, panel.panelName, { runner: bookkeeping() });
    const again = await importRatings(db, panel);
    expect(again.changedSessions).toEqual([]);
    const runner = bookkeeping();
    const summary = await refitPanel(db, panel.panelName, { runner });
    expect(runner.counts).toEqual({ session: 0, period: 0, flags: 0 });
    expect(summary.flagsRebuilt).toBe(false);
  });

  it('refits a changed session and exactly the period windows that contain it', async () => {
    const panel = smallPanel({ nWeeks: 26 });
    await importRatings(db, panel);
    await refitPanel(db, panel.panelName, { runner: bookkeeping() });
    const panelId = findPanel(db, panel.panelName)!.id;
    const before = listSessionVersions(db, panelId);
    const label = (i: number) => before[i].label;
    const changeSession = async (index: number) => {
      const changed = panel.ratings
        .filter((r) => r.session === label(index))
        .map((r, i) => (i === 0 ? { ...r, value: r.value === 5 ? 6 : 5 } : r));
      const report = await importRatings(db, panel, changed);
      expect(report.changedSessions).toEqual([label(index)]);
      const runner = bookkeeping();
      await refitPanel(db, panel.panelName, { runner });
      return runner;
    };
    const windows = (first: number, last: number) => panel.attributes.map((a) => `${a.name}@${label(first)}..${label(last)}`).sort();

    // Session 4 lies in the block 1–12 only (the latest window is 15–26).
    let runner = await changeSession(3);
    expect(runner.sessions).toEqual([label(3)]);
    expect([...runner.windows].sort()).toEqual(windows(0, 11));
    expect(runner.counts.flags).toBe(1);
    const version = listSessionVersions(db, panelId)[3].dataVersion;
    expect(version).toBeGreaterThan(before[3].dataVersion);
    for (const fit of loadSessionFits(db, panelId).filter((f) => f.session === label(3))) expect(fit.dataVersion).toBe(version);
    const block = loadPeriodFits(db, panelId).find((p) => p.lastSession === label(11))!;
    expect(block.sessions[3]).toEqual([label(3), version]);

    // Session 21 lies in the block 13–24 and in the latest window 15–26.
    runner = await changeSession(20);
    expect(runner.sessions).toEqual([label(20)]);
    expect([...runner.windows].sort()).toEqual([...windows(12, 23), ...windows(14, 25)].sort());
  });

  it('starts a new latest window from the stored fit of the previous one, and stores what a cold fit gives', async () => {
    // Unbalanced (assessors miss sessions), so the period fits go through the optimiser.
    const panel = smallPanel({ nWeeks: 16, nAssessors: 8, absenceRate: 0.1 });
    const lastLabel = panel.sessions[panel.sessions.length - 1].label;
    await importRatings(db, panel, panel.ratings.filter((r) => r.session !== lastLabel));
    const tasks: PeriodTask[] = [];
    const capturing = (inner: FitRunner): FitRunner => ({
      ...inner,
      run<T extends FitTask>(task: T): Promise<FitTaskResult<T>> {
        if (task.type === 'period') tasks.push(task as PeriodTask);
        return inner.run(task);
      },
    });
    await refitPanel(db, panel.panelName, { runner: capturing(inThread()) });
    // Windows 1–12 and 4–15 per attribute, nothing stored yet: cold starts.
    expect(tasks.filter((t) => t.sessions.length === 12)).toHaveLength(2 * panel.attributes.length);
    for (const task of tasks) expect(task.startRelativeSds).toBeUndefined();

    tasks.length = 0;
    await importRatings(db, panel, panel.ratings.filter((r) => r.session === lastLabel));
    await refitPanel(db, panel.panelName, { runner: capturing(inThread()) });
    // Only the new latest window 5–16, started from the stored fit of the window 4–15.
    expect(tasks.map((t) => [t.attribute, t.sessions[0], t.sessions[11]]).sort()).toEqual(
      panel.attributes.map((a) => [a.name, panel.sessions[4].label, lastLabel]).sort(),
    );
    const panelId = findPanel(db, panel.panelName)!.id;
    for (const task of tasks) {
      expect(task.startRelativeSds).toBeTruthy();
      expect(task.startReducedRelativeSds).toBeTruthy();
      const stored = loadPeriodFits(db, panelId, task.attribute).find((p) => p.lastSession === lastLabel)!.result as PeriodFitResult;
      const cold = fitPeriodModel(task.observations);
      expect(Math.abs(stored.json.remlCriterion - cold.json.remlCriterion)).toBeLessThan(CRITERION_OPTIMUM_ABSOLUTE);
      for (const [term, value] of Object.entries(cold.json.variance)) {
        expect(Math.abs((stored.json.variance as unknown as Record<string, number>)[term] - (value as number))).toBeLessThan(VARIANCE_RELATIVE * cold.json.variance.residual);
      }
      expect(Math.abs(stored.lrt!.likelihoodRatio - cold.productSessionLrt!.likelihoodRatio)).toBeLessThan(LIKELIHOOD_RATIO_ABSOLUTE);
    }
  });

  it('rebuilds only the flags when the thresholds change', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    await refitPanel(db, panel.panelName, { runner: bookkeeping() });
    savePanelThresholds(db, findPanel(db, panel.panelName)!.id, { fdrLevel: 0.1 });
    const runner = bookkeeping();
    await refitPanel(db, panel.panelName, { runner });
    expect(runner.counts).toEqual({ session: 0, period: 0, flags: 1 });
  });

  it('builds the same flags on the calling thread as through the runner when asked to', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    await refitPanel(db, panel.panelName, { runner: bookkeeping() });
    const panelId = findPanel(db, panel.panelName)!.id;
    const viaRunner = listFlags(db, panelId).map((f) => [f.key, f.isCurrent, f.flag.message]);
    savePanelThresholds(db, panelId, { fdrLevel: 0.05 });
    const runner = bookkeeping();
    const summary = await refitPanel(db, panel.panelName, { runner, flagsOnCallingThread: true });
    expect(runner.counts).toEqual({ session: 0, period: 0, flags: 0 });
    expect(summary.flagsRebuilt).toBe(true);
    expect(listFlags(db, panelId).map((f) => [f.key, f.isCurrent, f.flag.message])).toEqual(viaRunner);
  });

  it("scope 'all' recomputes everything", async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    await refitPanel(db, panel.panelName, { runner: bookkeeping() });
    const runner = bookkeeping();
    await refitPanel(db, panel.panelName, { runner, scope: 'all' });
    expect(runner.counts).toEqual({ session: 6, period: 3, flags: 1 });
  });
});

describe('RefitService', () => {
  it('returns a queued job at once and records its progress until done', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    const service = new RefitService(db, bookkeeping());
    const job = service.schedule(panel.panelName, 'import');
    expect(job.status).toBe('queued');
    expect(service.schedule(panel.panelName, 'import').id).toBe(job.id);
    await service.whenIdle();
    const done = service.job(job.id)!;
    expect(done.status).toBe('done');
    expect(done.nDone).toBe(done.nTasks);
    expect(done.finishedAt).not.toBeNull();
  });

  it('records a failed job with a plain message', async () => {
    const panel = smallPanel();
    await importRatings(db, panel);
    const errors: unknown[] = [];
    const service = new RefitService(db, failingRunner(), { onError: (e) => errors.push(e) });
    const job = service.schedule(panel.panelName, 'import');
    await service.whenIdle();
    const failed = service.job(job.id)!;
    expect(failed.status).toBe('failed');
    expect(failed.message).not.toMatch(/\/some\/path|boom/);
    expect(errors).toHaveLength(1);
  });
});
