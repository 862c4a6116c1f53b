/**
 * The incremental read of the panel history and packed ratings (store/panel-history.ts with a
 * memo kept between calls, as the refit service reads them) must give exactly what a fresh read
 * gives, and the packed ratings must be the store's rows in rating-id order, on a demo panel
 * fitted by the real refit, after new sessions, a changed session (its ratings read again),
 * a quarantined cell released into an old session (its rating id then lies beyond later sessions'
 * ids, so ids are not grouped by session), a stored period fit and an event; and the flags built
 * from it must be the same flags.
 */
import { createHash } from 'node:crypto';
import type { Database } from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createFitPool } from '../../server/fit-pool.js';
import { refitPanel } from '../../server/refit.js';
import { runFlagsTask } from '../../server/workers/fit-tasks.js';
import { findPanel, listAttributes, listSessionVersions } from '../../store/fits-sessions.js';
import { savePeriodFit } from '../../store/fits-results.js';
import { addPanelEvent } from '../../store/monitor-events.js';
import { createHistoryReadMemo, loadPackedRatings, loadPanelHistory } from '../../store/panel-history.js';
import { panelSettings, type GeneratedPanel } from '../../demo/generate-panel.js';
import type { Rating } from '../../domain/ratings.js';
import type { FitJson, StoredPeriodResult } from '../../domain/analysis.js';
import { importRatingEvents } from '../../store/import-core.js';
import { discardQuarantined, listQuarantined, releaseQuarantined } from '../../store/quarantine.js';
import { countingRunner, makeTestStore, smallPanel } from './helpers.js';

/** As helpers.importRatings, with quarantine on (conflicting duplicates are held, the rest imported). */
async function importRatings(db: Database, panel: GeneratedPanel, ratings: Rating[]) {
  const sha256 = createHash('sha256').update(JSON.stringify(ratings)).digest('hex');
  return importRatingEvents(
    db,
    { panel: panel.panelName, fileName: 'ratings.csv', source: 'cli', sha256, quarantine: true, settings: panelSettings(panel) as never },
    ratings.map((rating, index) => ({ type: 'rating' as const, row: index + 2, column: rating.attribute, rating })),
  );
}

const WINDOW = 12;
const runner = countingRunner(createFitPool({ mode: 'in-thread' }), { skipPeriodFits: true });

/** Kept between the reads of the tests below, as the refit service keeps its memo between jobs. */
const memo = createHistoryReadMemo();

function expectSameAsBefore(db: Database, panelId: number) {
  const inputs = { history: loadPanelHistory(db, panelId, { windowSessions: WINDOW, memo }), ratings: loadPackedRatings(db, panelId, memo) };
  const fresh = { history: loadPanelHistory(db, panelId, { windowSessions: WINDOW }), ratings: loadPackedRatings(db, panelId) };
  expect(inputs.history).toEqual(fresh.history);
  expect(inputs.ratings).toEqual(fresh.ratings);
  // The packed order is the store's rating-id order (read here with one plain query).
  const rows = db
    .prepare('SELECT s.label, r.value FROM rating r JOIN session s ON s.id = r.session_id WHERE s.panel_id = ? ORDER BY r.id')
    .raw()
    .all(panelId) as [string, number][];
  expect(Array.from(inputs.ratings.sessionIndex, (i) => inputs.ratings.sessions[i].label)).toEqual(rows.map(([label]) => label));
  expect(Array.from(inputs.ratings.value)).toEqual(rows.map(([, value]) => value));
  const task = (history: typeof inputs.history, ratings: typeof inputs.ratings) => runFlagsTask({ type: 'flags', history, ratings, thresholds: null, retraining: [] });
  expect(task(inputs.history, inputs.ratings)).toEqual(task(fresh.history, fresh.ratings));
  return inputs;
}

describe('an incremental read of the history and ratings gives what a fresh read gives', () => {
  let db: Database;
  let panel: GeneratedPanel;
  let panelId: number;
  const sessionsOf = (labels: string[]) => panel.ratings.filter((r) => labels.includes(r.session));

  beforeAll(async () => {
    db = makeTestStore();
    panel = smallPanel({ nWeeks: 16, nAssessors: 10, nAttributes: 10, faults: 'demo', absenceRate: 0.05 });
    const labels = panel.sessions.map((s) => s.label);
    // One cell of the third session given twice with different values: held in quarantine, released later.
    const first = sessionsOf(labels.slice(0, 12));
    const twice = first.find((r) => r.session === labels[2])!;
    await importRatings(db, panel, [...first, { ...twice, value: twice.value === 0 ? 1 : twice.value - 1 }]);
    await refitPanel(db, panel.panelName, { runner });
    panelId = findPanel(db, panel.panelName)!.id;
  });
  afterAll(async () => {
    await runner.close();
    db.close();
  });

  it('after the first refit, and again from its caches', () => {
    const first = expectSameAsBefore(db, panelId);
    expect(first.history.results.length).toBeGreaterThan(40);
    expect(first.ratings.value.length).toBeGreaterThan(1000);
    expectSameAsBefore(db, panelId);
  });

  it('with a stored period fit (and a window that could not be fitted) and an event', () => {
    const sessions = listSessionVersions(db, panelId);
    const [attribute, other] = listAttributes(db, panelId);
    const window = sessions.slice(0, WINDOW);
    const record = (attributeId: number, result: StoredPeriodResult) => ({
      attributeId,
      windowSessions: WINDOW,
      firstSessionId: window[0].id,
      lastSessionId: window[window.length - 1].id,
      sessions: window.map((s) => [s.label, s.dataVersion] as [string, number]),
      analysisVersion: 'test',
      result,
    });
    savePeriodFit(db, panelId, record(attribute.id, { json: { variance: { 'product:session': 0.04, residual: 0.2 } } as unknown as FitJson, lrt: { likelihoodRatio: 9.1, pValue: 0.0013 }, diagnostics: {} }));
    savePeriodFit(db, panelId, record(other.id, { problem: 'Not fitted in this test.' }));
    addPanelEvent(db, panelId, { kind: 'retraining', session: sessions[6].label, assessor: 'A02', note: 'retrained' });
    const inputs = expectSameAsBefore(db, panelId);
    expect(inputs.history.periodFits).toHaveLength(1);
    expect(inputs.history.events).toHaveLength(1);
  });

  it('after a changed session and a new session (only those read again)', async () => {
    const labels = panel.sessions.map((s) => s.label);
    const changed = sessionsOf([labels[3]]).map((r, i) => (i < 5 ? { ...r, value: Math.min(10, r.value + 1) } : r));
    await importRatings(db, panel, changed);
    await importRatings(db, panel, sessionsOf([labels[12]]));
    await refitPanel(db, panel.panelName, { runner });
    expectSameAsBefore(db, panelId);
  });

  it('after a quarantined cell is released into an old session (rating ids interleave)', async () => {
    const labels = panel.sessions.map((s) => s.label);
    const [cell, copy] = listQuarantined(db, panel.panelName);
    expect(cell.session).toBe(labels[2]);
    releaseQuarantined(db, cell.id, 5);
    discardQuarantined(db, copy.id);
    const ranges = db
      .prepare('SELECT s.label, min(r.id) AS lo, max(r.id) AS hi FROM rating r JOIN session s ON s.id = r.session_id WHERE s.label IN (?, ?) GROUP BY s.id ORDER BY s.label')
      .all(labels[2], labels[12]) as { lo: number; hi: number }[];
    expect(ranges[0].hi > ranges[1].lo && ranges[1].hi > ranges[0].lo).toBe(true);
    await refitPanel(db, panel.panelName, { runner });
    expectSameAsBefore(db, panelId);
  });
});
