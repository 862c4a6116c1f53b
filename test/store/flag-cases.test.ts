/**
 * Flags as cases: one id per kind + assessor + product + attribute across rebuilds, evidence
 * updated in place, dismissals kept until the evidence gets materially worse (the documented rule,
 * docs/methods.md §6.7, "Flag cases and re-opening"), automatic close and re-open as the same case,
 * `since` on the detection session, and the migration of stored flags and dismissals.
 */
import { copyFileSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import type { Flag } from '../../domain/flags.js';
import { findPanel } from '../../store/fits-sessions.js';
import { defaultMigrationsFolder, migrate } from '../../store/migrate.js';
import { addRetraining, listPanelEvents, syncRetrainingEvents, updateRetraining } from '../../store/monitor-events.js';
import { flagHistory, getFlag, listFlags, replaceCurrentFlags, reviewFlag } from '../../store/monitor-flags.js';
import { openStore, type Database } from '../../store/open-store.js';
import { importRatings, smallPanel } from '../monitor/helpers.js';
import { tempFolder } from './helpers.js';

const build = { dataSignature: 'sig', thresholdsHash: 'th' };

function lenient(firstSession: string, lastSession: string, meanOffset: number, severity: Flag['severity'] = 'watch', pValue = 0.01): Flag {
  return {
    kind: 'lenient',
    assessor: 'A02',
    product: null,
    attribute: 'sweet',
    firstSession,
    severity,
    evidence: { test: 'one-sample t', statistic: 3, pValue, qValue: pValue, n: 8, threshold: 'p < 0.05', meanOffset, lastSession },
    message: `A02 is ${meanOffset} points above the panel.`,
  };
}

let db: Database | undefined;
let cleanup: (() => void) | undefined;
afterEach(() => {
  db?.close();
  cleanup?.();
  db = undefined;
  cleanup = undefined;
});

async function storeWithSessions(): Promise<{ db: Database; panelId: number; labels: string[] }> {
  const panel = smallPanel();
  db = openStore(':memory:');
  await importRatings(db, panel);
  return { db, panelId: findPanel(db, panel.panelName)!.id, labels: panel.sessions.map((s) => s.label) };
}

describe('flag cases', () => {
  it('keeps one id when the evidence window moves, and keeps a dismissal with its note', async () => {
    const { db, panelId, labels } = await storeWithSessions();
    replaceCurrentFlags(db, panelId, [lenient(labels[0], labels[3], 0.8)], build);
    const [first] = listFlags(db, panelId);
    expect(first.flag).toMatchObject({ id: first.id, status: 'open', detectedSession: labels[3], updatedSession: labels[3] });
    expect(reviewFlag(db, panelId, first.id, 'dismissed', 'Known: new sweetener batch.', '2026-02-01T10:00:00Z', 'Lead')).toBe(true);

    // next week: the window starts one session later, the effect is about the same
    replaceCurrentFlags(db, panelId, [lenient(labels[1], labels[4], 1.0)], build);
    const [again] = listFlags(db, panelId);
    expect(again.id).toBe(first.id);
    expect(again.status).toBe('dismissed');
    expect(again.reviewNote).toBe('Known: new sweetener batch.');
    expect(again.flag.firstSession).toBe(labels[1]);
    expect(again.flag.detectedSession).toBe(labels[3]);
    expect(again.flag.updatedSession).toBe(labels[4]);
    expect(listFlags(db, panelId, { includeHistory: true })).toHaveLength(1);
    expect(flagHistory(db, first.id)).toEqual([expect.objectContaining({ status: 'dismissed', reviewedBy: 'Lead', source: 'review' })]);
  });

  it('re-opens a dismissed case only when it gets materially worse, saying why', async () => {
    const { db, panelId, labels } = await storeWithSessions();
    replaceCurrentFlags(db, panelId, [lenient(labels[0], labels[3], 0.8)], build);
    const id = listFlags(db, panelId)[0].id;
    reviewFlag(db, panelId, id, 'dismissed', 'ok');
    // 1.15 is 44 % above 0.8: within what was dismissed
    replaceCurrentFlags(db, panelId, [lenient(labels[1], labels[4], 1.15)], build);
    expect(getFlag(db, panelId, id)!.status).toBe('dismissed');
    // watch -> act
    replaceCurrentFlags(db, panelId, [lenient(labels[2], labels[5], 1.15, 'act')], build);
    const reopened = getFlag(db, panelId, id)!;
    expect(reopened.status).toBe('open');
    expect(reopened.reviewNote).toMatch(/watch to act/);
    expect(reopened.statusSession).toBe(labels.at(-1));
  });

  it('re-opens a dismissed case whose effect grows by more than half, or whose p falls 100-fold', async () => {
    const { db, panelId, labels } = await storeWithSessions();
    replaceCurrentFlags(db, panelId, [lenient(labels[0], labels[3], 0.8)], build);
    const id = listFlags(db, panelId)[0].id;
    reviewFlag(db, panelId, id, 'dismissed', 'ok');
    replaceCurrentFlags(db, panelId, [lenient(labels[1], labels[4], 1.25)], build);
    expect(getFlag(db, panelId, id)!.reviewNote).toMatch(/grew from 0.80 points to 1.25 points/);

    reviewFlag(db, panelId, id, 'dismissed', 'still ok');
    replaceCurrentFlags(db, panelId, [lenient(labels[1], labels[5], 1.25, 'watch', 0.0002)], build);
    expect(getFlag(db, panelId, id)!.status).toBe('dismissed'); // 0.01 / 0.0002 = 50: not enough
    replaceCurrentFlags(db, panelId, [lenient(labels[1], labels[5], 1.25, 'watch', 0.00009)], build);
    expect(getFlag(db, panelId, id)!.reviewNote).toMatch(/factor of 100/);
  });

  it('closes a case that no longer fires and re-opens the same id when it fires again', async () => {
    const { db, panelId, labels } = await storeWithSessions();
    replaceCurrentFlags(db, panelId, [lenient(labels[0], labels[3], 0.8)], build);
    const id = listFlags(db, panelId)[0].id;
    replaceCurrentFlags(db, panelId, [], build);
    expect(listFlags(db, panelId)).toHaveLength(0);
    const closed = getFlag(db, panelId, id)!;
    expect(closed.status).toBe('closed');
    expect(closed.isCurrent).toBe(false);
    expect(closed.reviewNote).toMatch(/no longer/);
    replaceCurrentFlags(db, panelId, [lenient(labels[2], labels[5], 0.9)], build);
    const back = listFlags(db, panelId);
    expect(back.map((r) => [r.id, r.status])).toEqual([[id, 'open']]);
    expect(flagHistory(db, id).map((h) => h.source)).toEqual(['no-longer-fires', 'fires-again']);
  });

  it('filters since a session on the detection session or a status change, not on where the evidence starts', async () => {
    const { db, panelId, labels } = await storeWithSessions();
    const old = lenient(labels[0], labels[2], 0.8);
    const recent = { ...lenient(labels[0], labels[5], 2.5, 'act'), assessor: 'A05' };
    replaceCurrentFlags(db, panelId, [old], build);
    replaceCurrentFlags(db, panelId, [old, recent], build);
    expect(listFlags(db, panelId, { sinceSession: labels[4] }).map((r) => r.flag.assessor)).toEqual(['A05']);
    const oldId = listFlags(db, panelId).find((r) => r.flag.assessor === 'A02')!.id;
    reviewFlag(db, panelId, oldId, 'dismissed', 'seen');
    expect(listFlags(db, panelId, { sinceSession: labels[5] }).map((r) => r.flag.assessor).sort()).toEqual(['A02', 'A05']);
    expect(() => listFlags(db, panelId, { sinceSession: 'nope' })).toThrow(RangeError);
  });
});

describe('migration 0004', () => {
  it('merges stored flags of one scope into one case and keeps the dismissal and its note', async () => {
    const folder = tempFolder('mig');
    cleanup = folder.remove;
    const old = join(folder.folder, 'migrations');
    mkdirSync(old);
    for (const name of ['0001_store.sql', '0002_fits.sql', '0003_reference_period.sql']) copyFileSync(join(defaultMigrationsFolder(), name), join(old, name));
    db = openStore(':memory:', { migrationsFolder: old });
    const panel = smallPanel();
    await importRatings(db, panel);
    const panelId = findPanel(db, panel.panelName)!.id;
    const labels = panel.sessions.map((s) => s.label);
    const insert = db.prepare(
      `INSERT INTO flag (panel_id, flag_key, kind, assessor, product, attribute, first_session, severity, evidence_json, message, current, status, review_note, reviewed_at, first_seen_at, data_signature)
       VALUES (?, ?, 'lenient', 'A02', NULL, 'sweet', ?, 'watch', ?, 'm', ?, ?, ?, ?, ?, 's')`,
    );
    // the week-1 copy was dismissed (no longer current); the week-2 copy came back as a new open flag
    insert.run(panelId, `lenient|A02||sweet|${labels[0]}`, labels[0], JSON.stringify({ test: 't', n: 8, threshold: 'x', meanOffset: 0.8, lastSession: labels[3] }), 0, 'dismissed', 'Known batch.', '2026-01-30T09:00:00Z', '2026-01-29T09:00:00Z');
    insert.run(panelId, `lenient|A02||sweet|${labels[1]}`, labels[1], JSON.stringify({ test: 't', n: 8, threshold: 'x', meanOffset: 0.9, lastSession: labels[4] }), 1, 'open', null, null, '2026-02-05T09:00:00Z');
    const dismissedId = (db.prepare("SELECT id FROM flag WHERE status = 'dismissed'").get() as { id: number }).id;
    db.prepare("INSERT INTO retraining (panel_id, assessor, status, retraining_date, created_at, updated_at) VALUES (?, 'A02', 'planned', '2026-02-10', 'x', 'x')").run(panelId);
    db.prepare('INSERT INTO retraining_flag (retraining_id, flag_key) VALUES (1, ?)').run(`lenient|A02||sweet|${labels[1]}`);

    migrate(db);
    const cases = listFlags(db, panelId, { includeHistory: true });
    expect(cases).toHaveLength(1);
    expect(cases[0]).toMatchObject({ id: dismissedId, status: 'dismissed', reviewNote: 'Known batch.', isCurrent: true, detectedSession: labels[3], updatedSession: labels[4] });
    expect(cases[0].flag.firstSession).toBe(labels[1]);
    expect(cases[0].dismissed?.evidence.meanOffset).toBe(0.8);
    expect(flagHistory(db, dismissedId)).toEqual([expect.objectContaining({ status: 'dismissed', note: 'Known batch.' })]);
    expect(db.prepare('SELECT flag_key AS k FROM retraining_flag').all()).toEqual([{ k: 'lenient|A02||sweet' }]);
  });
});

describe('one retraining record', () => {
  it('a retraining recorded as done creates the baseline-restarting event at the first session on or after its date; back to planned removes it', async () => {
    const { db, panelId, labels } = await storeWithSessions();
    const sessions = db.prepare('SELECT label, session_date AS date FROM session WHERE panel_id = ? ORDER BY session_date').all(panelId) as { label: string; date: string }[];
    const id = addRetraining(db, panelId, { assessor: 'A02', status: 'done', date: sessions[2].date, note: 'calibration', flagKeys: [] });
    expect(syncRetrainingEvents(db, panelId)).toBe(1);
    const events = listPanelEvents(db, panelId).filter((e) => e.kind === 'retraining');
    expect(events).toEqual([expect.objectContaining({ session: labels[2], assessor: 'A02' })]);
    expect(syncRetrainingEvents(db, panelId)).toBe(0); // once
    updateRetraining(db, panelId, id, { status: 'planned' });
    syncRetrainingEvents(db, panelId);
    expect(listPanelEvents(db, panelId).filter((e) => e.kind === 'retraining')).toEqual([]);
    // a date after the last session: the event waits for that session
    addRetraining(db, panelId, { assessor: 'A03', status: 'done', date: '2099-01-01', note: '', flagKeys: [] });
    expect(syncRetrainingEvents(db, panelId)).toBe(0);
  });
});
