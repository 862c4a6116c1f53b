/**
 * A reference period picked by the panel leader (chart baselines come from the first N sessions
 * or from a reference period the panel leader picks, methods §3.2): recorded through
 * the events form with validation, kept by the store migration, and used by the flag engine and
 * the assessor pages.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import Database from 'better-sqlite3';
import type { Flag } from '../../domain/flags.js';
import { createFitPool } from '../../server/fit-pool.js';
import { refitPanel } from '../../server/refit.js';
import { findPanel } from '../../store/fits-sessions.js';
import { defaultMigrationsFolder, listMigrations, migrate } from '../../store/migrate.js';
import { savePanelThresholds } from '../../store/monitor-settings.js';
import { listFlags } from '../../store/monitor-flags.js';
import { csrfFrom, makeTestApp, type TestApp } from '../http/http-helpers.js';
import { importRatings, smallPanel } from './helpers.js';
import { copyFileSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

// A2 rates 2 points higher from the 16th of 30 sessions on: a step in their level.
const panel = smallPanel({ nWeeks: 30, nAssessors: 8, faults: [{ kind: 'lenient', assessor: 'A02', size: 2, fromSession: 15 }] });
const name = panel.panelName;
const enc = encodeURIComponent(name);
const labels = panel.sessions.map((s) => s.label);
let t: TestApp;

async function refit(): Promise<void> {
  const runner = createFitPool({ mode: 'in-thread' });
  try {
    await refitPanel(t.db, name, { runner });
  } finally {
    await runner.close();
  }
}

function driftFlags(assessor: string): Flag[] {
  const panelId = findPanel(t.db, name)!.id;
  return listFlags(t.db, panelId)
    .map((r) => r.flag)
    .filter((f) => f.kind === 'drift' && f.assessor === assessor);
}

async function postEvent(fields: Record<string, string>) {
  const page = await t.app.inject({ url: `/panels/${enc}/monitor/events` });
  const { token, cookie } = csrfFrom(page);
  return t.app.inject({
    method: 'POST',
    url: `/panels/${enc}/monitor/events`,
    headers: { cookie, 'content-type': 'application/x-www-form-urlencoded' },
    payload: new URLSearchParams({ _csrf: token, assessor: '', note: '', ...fields }).toString(),
  });
}

beforeAll(async () => {
  t = await makeTestApp();
  await importRatings(t.db, panel);
  // Baselines of 10 sessions (at least 8), so the first-values baseline lies before the step.
  savePanelThresholds(t.db, findPanel(t.db, name)!.id, { charts: { baselineSessions: 10, minBaselineSessions: 8 } });
  await refit();
}, 180_000);
afterAll(async () => t.close());

describe('reference period for chart baselines', () => {
  it('without one, the step after the first-values baseline is a drift flag', () => {
    const flags = driftFlags('A02');
    expect(flags.length).toBeGreaterThan(0);
    for (const f of flags) expect((f.evidence.baseline as { source: string }).source).toBe('first-values');
  });

  it('rejects a period that is too short, reversed or has no end, naming the rule', async () => {
    const short = await postEvent({ kind: 'reference-period', session: labels[20], until: labels[24], assessor: 'A02' });
    expect(short.statusCode).toBe(400);
    expect(short.body).toContain('at least 8 sessions');
    const reversed = await postEvent({ kind: 'reference-period', session: labels[25], until: labels[16], assessor: 'A02' });
    expect(reversed.statusCode).toBe(400);
    expect(reversed.body).toContain(`end at or after ${labels[25]}`);
    const open = await postEvent({ kind: 'reference-period', session: labels[16] });
    expect(open.statusCode).toBe(400);
    const json = (await t.app.inject({ url: `/panels/${enc}/monitor/events.json` })).json();
    expect(json.events).toEqual([]);
  });

  it("a period after the step becomes A02's baseline: no drift flag, and the page says where the baseline came from", async () => {
    const posted = await postEvent({ kind: 'reference-period', session: labels[16], until: labels[29], assessor: 'A02', note: 'after recalibration' });
    expect(posted.statusCode).toBe(303);
    const json = (await t.app.inject({ url: `/panels/${enc}/monitor/events.json` })).json();
    expect(json.events.map((e: { kind: string; session: string; untilSession: string; assessor: string }) => [e.kind, e.session, e.untilSession, e.assessor])).toEqual([
      ['reference-period', labels[16], labels[29], 'A02'],
    ]);
    expect(json.events[0].sessionsText).toBe(`${labels[16]} to ${labels[29]}`);
    expect(json.events[0].restartsBaseline).toBe(false);
    await t.app.refitService.whenIdle();
    expect(driftFlags('A02')).toEqual([]);
    // Other assessors keep their first-values baselines.
    const page = (await t.app.inject({ url: `/panels/${enc}/monitor/assessors/A02.json` })).json();
    expect(page.summary.baselineFromReferencePeriod).toBe(true);
    expect(page.summary.nReference).toBe(14);
    const other = (await t.app.inject({ url: `/panels/${enc}/monitor/assessors/A03.json` })).json();
    expect(other.summary.baselineFromReferencePeriod).toBe(false);
    expect(other.summary.nReference).toBe(10);
  }, 180_000);

  it('a period inside the early sessions keeps the step visible, now judged against that period', async () => {
    const panelId = findPanel(t.db, name)!.id;
    t.db.prepare('DELETE FROM panel_event WHERE panel_id = ?').run(panelId);
    const posted = await postEvent({ kind: 'reference-period', session: labels[2], until: labels[13] });
    expect(posted.statusCode).toBe(303);
    await t.app.refitService.whenIdle();
    const flags = driftFlags('A02');
    expect(flags.length).toBeGreaterThan(0);
    for (const f of flags) {
      expect((f.evidence.baseline as { source: string; nReference: number }).source).toBe('reference-period');
      // A one-session step is worded as a jump against the previous sessions (its spread still
      // comes from the reference period); a slow drift names the reference period.
      if (f.evidence.pattern === 'jump') expect(f.message).toMatch(/rose by about|fell by about/);
      else expect(f.message).toContain('chosen reference period');
    }
  }, 180_000);
});

describe('events form before the first refit', () => {
  it('offers the stored assessors even when no indices have been fitted yet', async () => {
    const fresh = await makeTestApp();
    try {
      const small = smallPanel({ nWeeks: 3, nAssessors: 4 });
      await importRatings(fresh.db, small);
      const json = (await fresh.app.inject({ url: `/panels/${encodeURIComponent(small.panelName)}/monitor/events.json` })).json();
      expect(json.assessorOptions).toEqual(['A01', 'A02', 'A03', 'A04']);
    } finally {
      await fresh.close();
    }
  });
});

describe('migration 0003 (reference-period events)', () => {
  it('keeps the events of a store made before it, with their ids, and checks the end session', () => {
    const folder = mkdtempSync(join(tmpdir(), 'ps-mig-'));
    for (const file of listMigrations(defaultMigrationsFolder()).filter((f) => f < '0003')) copyFileSync(join(defaultMigrationsFolder(), file), join(folder, file));
    const db = new Database(':memory:');
    db.pragma('foreign_keys = ON');
    migrate(db, folder);
    db.prepare("INSERT INTO panel (name, created_at) VALUES ('p', '2026-01-01')").run();
    db.prepare("INSERT INTO panel_event (id, panel_id, kind, session_label, assessor, note, created_at) VALUES (7, 1, 'retraining', 'S3', 'A1', 'n', '2026-01-02')").run();
    const applied = migrate(db);
    expect(applied.map((m) => m.name)).toEqual(listMigrations(defaultMigrationsFolder()).filter((f) => f >= '0003'));
    expect(db.prepare('SELECT id, kind, session_label, until_session_label, assessor FROM panel_event').all()).toEqual([
      { id: 7, kind: 'retraining', session_label: 'S3', until_session_label: null, assessor: 'A1' },
    ]);
    const insert = db.prepare("INSERT INTO panel_event (panel_id, kind, session_label, until_session_label, note, created_at) VALUES (1, ?, 'S1', ?, '', '2026-01-03')");
    expect(() => insert.run('reference-period', null)).toThrow(/CHECK/);
    expect(() => insert.run('note', 'S4')).toThrow(/CHECK/);
    expect(() => insert.run('reference-period', 'S9')).not.toThrow();
  });
});
