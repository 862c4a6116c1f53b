/** Shared set-up for the monitor tests: a migrated in-memory store loaded from the demo generator. */
import { createHash } from 'node:crypto';
import type { Database } from 'better-sqlite3';
import { generatePanel, panelSettings, type GeneratedPanel, type PanelScenarioOptions } from '../../demo/generate-panel.js';
import type { Rating } from '../../domain/ratings.js';
import { importRatingEvents, type ImportReport } from '../../store/import-core.js';
import { openStore } from '../../store/open-store.js';
import { createFitPool, type FitRunner } from '../../server/fit-pool.js';
import { refitPanel } from '../../server/refit.js';
import { makeTestApp, type TestApp } from '../http/http-helpers.js';
import type { FitTask, FitTaskResult } from '../../server/workers/fit-task-types.js';

export function makeTestStore(): Database {
  return openStore(':memory:');
}

export function smallPanel(overrides: Partial<PanelScenarioOptions> = {}): GeneratedPanel {
  return generatePanel({
    seed: 11,
    nWeeks: 6,
    nAssessors: 6,
    startDate: '2026-01-05',
    faults: 'none',
    nAttributes: 3,
    absenceRate: 0,
    ...overrides,
  });
}

/** Imports ratings as one file would arrive (the hash names the content, as the real reader does). */
export async function importRatings(db: Database, panel: GeneratedPanel, ratings: Rating[] = panel.ratings): Promise<ImportReport> {
  const sha256 = createHash('sha256').update(JSON.stringify(ratings)).digest('hex');
  return importRatingEvents(
    db,
    { panel: panel.panelName, fileName: 'ratings.csv', source: 'cli', sha256, quarantine: false, settings: panelSettings(panel) as never },
    ratings.map((rating, index) => ({ type: 'rating' as const, row: index + 2, column: rating.attribute, rating })),
  );
}

/**
 * Wraps a runner and counts the tasks it ran, by type (what a refit actually recomputed).
 * With skipPeriodFits, period tasks are answered "not fitted" without fitting: period fits take
 * seconds each and the bookkeeping tests only need to know which windows were asked for.
 */
export function countingRunner(
  inner: FitRunner,
  options: { skipPeriodFits?: boolean } = {},
): FitRunner & { counts: Record<FitTask['type'], number>; sessions: string[]; windows: string[] } {
  const counts = { session: 0, period: 0, flags: 0 };
  const sessions: string[] = [];
  const windows: string[] = [];
  return {
    mode: inner.mode,
    threads: inner.threads,
    counts,
    sessions,
    windows,
    run<T extends FitTask>(task: T): Promise<FitTaskResult<T>> {
      counts[task.type] += 1;
      if (task.type === 'session') sessions.push(task.session);
      if (task.type === 'period') {
        windows.push(`${task.attribute}@${task.sessions[0]}..${task.sessions[task.sessions.length - 1]}`);
        if (options.skipPeriodFits) {
          return Promise.resolve({ attribute: task.attribute, result: null, problem: 'Not fitted in this test.' } as FitTaskResult<T>);
        }
      }
      return inner.run(task);
    },
    close: () => inner.close(),
  };
}

/** A test app whose store holds the panel, imported and refitted in-thread (fits, indices, flags). */
export async function makeFittedTestApp(panel: GeneratedPanel): Promise<TestApp> {
  const t = await makeTestApp();
  await importRatings(t.db, panel);
  const runner = createFitPool({ mode: 'in-thread' });
  await refitPanel(t.db, panel.panelName, { runner });
  await runner.close();
  return t;
}
