/**
 * Retraining bookkeeping: a retraining recorded as done is judged by the refit once sessions
 * follow it (analysis/flags evaluateRetraining, tested against R there), the evaluation is
 * stored with the record, and the flags it was linked to are closed with that evidence.
 */
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import type { Database } from 'better-sqlite3';
import { createFitPool } from '../../server/fit-pool.js';
import { refitPanel } from '../../server/refit.js';
import { findPanel } from '../../store/fits-sessions.js';
import { addRetraining, listRetraining } from '../../store/monitor-events.js';
import { listFlags } from '../../store/monitor-flags.js';
import { countingRunner, importRatings, makeTestStore, smallPanel } from './helpers.js';

let db: Database;
beforeEach(() => {
  db = makeTestStore();
});
afterEach(() => db.close());

/** Import the first 8 of 16 weeks, refit, record a retraining done before week 9 linked to the act flags, import the rest, refit. */
async function retrainingScenario(nAssessors: number, size: number) {
  const panel = smallPanel({ nWeeks: 16, nAssessors, faults: [{ kind: 'lenient', assessor: 'A02', size, fromSession: 0, toSession: 7 }] });
  const firstHalf = new Set(panel.sessions.slice(0, 8).map((s) => s.label));
  const runner = () => countingRunner(createFitPool({ mode: 'in-thread' }), { skipPeriodFits: true });
  await importRatings(db, panel, panel.ratings.filter((r) => firstHalf.has(r.session)));
  await refitPanel(db, panel.panelName, { runner: runner() });
  const panelId = findPanel(db, panel.panelName)!.id;
  const actBefore = listFlags(db, panelId, { assessor: 'A02', severity: 'act', status: 'open' });
  expect(actBefore.map((r) => r.flag.kind)).toContain('lenient');
  const id = addRetraining(db, panelId, {
    assessor: 'A02',
    status: 'done',
    date: panel.sessions[8].date,
    note: 'Calibration session with references.',
    flagKeys: actBefore.map((r) => r.key),
  });
  // No session on or after the date yet: nothing to judge.
  await refitPanel(db, panel.panelName, { runner: runner() });
  expect(listRetraining(db, panelId)[0].outcome).toBeNull();
  await importRatings(db, panel, panel.ratings.filter((r) => !firstHalf.has(r.session)));
  await refitPanel(db, panel.panelName, { runner: runner() });
  const outcome = listRetraining(db, panelId).find((r) => r.id === id)!.outcome!;
  expect(outcome.eventSession).toBe(panel.sessions[8].label);
  expect(outcome.nSessionsAfter).toBe(8);
  const linked = listFlags(db, panelId, { includeHistory: true }).filter((f) => actBefore.some((b) => b.key === f.key));
  expect(linked).toHaveLength(actBefore.length);
  return { outcome, linked };
}

describe('retraining evaluation', () => {
  it('closes the linked flags, with the evidence as the note, when every index concerned improved', async () => {
    // Seed 11, 8 assessors, offset +2 for 8 weeks: before the retraining only "lenient" fires.
    const { outcome, linked } = await retrainingScenario(8, 2);
    expect(outcome.kindsBefore).toEqual(['lenient']);
    const level = outcome.comparisons.find((c) => c.index === 'level')!;
    expect(level.before.mean!).toBeGreaterThan(level.after.mean!);
    expect(outcome.decision).toBe('close');
    for (const r of linked) {
      expect(r.status).toBe('closed');
      expect(r.reviewNote).toBe(outcome.message);
    }
  }, 120_000);

  it('keeps the flags open when an index concerned did not improve', async () => {
    // Seed 11, 6 assessors, offset +2.5: a non-discriminating flag fires too and does not clear.
    const { outcome, linked } = await retrainingScenario(6, 2.5);
    expect(outcome.decision).toBe('keep');
    expect(outcome.comparisons.some((c) => !c.improved)).toBe(true);
    for (const r of linked) expect(r.status).toBe('open');
  }, 120_000);
});
