/**
 * Import acceptance: a realistic year (12 assessors × 6 products × 2 replicates × 10 attributes
 * × 52 weeks = 74,880 ratings) imports through the CLI, the HTTP API and the web form into
 * identical stores; long and wide forms of the same data give identical stores; re-import is a
 * no-op. "Identical" is checked on the export, which lists every stored rating in a fixed order.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { afterAll, describe, expect, it } from 'vitest';
import { generatePanel, panelSettings, toLongCsv, toWideCsv } from '../../demo/generate-panel.js';
import { runImportCommand } from '../../server/cli/import-command.js';
import { exportRatings } from '../../store/export-ratings.js';
import { openStore, type Database } from '../../store/open-store.js';
import { csrfFrom, freshApps } from './http-helpers.js';

const PANEL = 'year panel';
const folder = mkdtempSync(join(tmpdir(), 'panel-steward-year-'));
afterAll(() => rmSync(folder, { recursive: true, force: true }));

const year = generatePanel({
  seed: 52,
  nWeeks: 52,
  nAssessors: 12,
  startDate: '2025-01-06',
  faults: 'none',
  nProductsPerSession: 6,
  nReplicates: 2,
  nAttributes: 10,
  absenceRate: 0,
});
const longText = toLongCsv(year);
const wideText = toWideCsv(year);
const settingsText = JSON.stringify(panelSettings(year));
const longPath = join(folder, 'year-long.csv');
const widePath = join(folder, 'year-wide.csv');
const settingsPath = join(folder, 'panel-settings.json');
writeFileSync(longPath, longText);
writeFileSync(widePath, wideText);
writeFileSync(settingsPath, settingsText);

const silent = { stdout: { write: () => true }, stderr: { write: () => true } };

async function exportCsv(db: Database): Promise<string> {
  const chunks: Buffer[] = [];
  const sink = new Writable({
    write(chunk, _encoding, done) {
      chunks.push(Buffer.from(chunk));
      done();
    },
  });
  await exportRatings(db, { panel: PANEL, format: 'csv' }, sink);
  return Buffer.concat(chunks).toString('utf8');
}

async function viaCli(file: string, dbName: string): Promise<{ exitCode: number; outcome: string; exported: string }> {
  const dbPath = join(folder, dbName);
  const { exitCode, report } = await runImportCommand(file, { panel: PANEL, db: dbPath, settings: settingsPath }, silent);
  const db = openStore(dbPath);
  try {
    return { exitCode, outcome: report.outcome, exported: await exportCsv(db) };
  } finally {
    db.close();
  }
}

function form(fields: Record<string, string>): FormData {
  const body = new FormData();
  for (const [name, value] of Object.entries(fields)) body.append(name, value);
  body.append('file', new Blob([longText], { type: 'text/csv' }), 'year-long.csv');
  body.append('settings', new Blob([settingsText], { type: 'application/json' }), 'panel-settings.json');
  return body;
}

const fresh = freshApps();

describe('a realistic year through the three ways in', () => {
  it('has the size of a real panel year', () => {
    expect(year.ratings.length).toBe(12 * 6 * 2 * 10 * 52);
  });

  it('CLI (long and wide), HTTP API and web form give byte-identical exports; re-import changes nothing', { timeout: 240_000 }, async () => {
    const cliLong = await viaCli(longPath, 'cli-long.db');
    expect(cliLong).toMatchObject({ exitCode: 0, outcome: 'imported' });
    expect(cliLong.exported.trim().split('\n')).toHaveLength(year.ratings.length + 1);

    const cliWide = await viaCli(widePath, 'cli-wide.db');
    expect(cliWide.outcome).toBe('imported');
    expect(cliWide.exported).toBe(cliLong.exported);

    const api = await fresh();
    const apiResponse = await api.app.inject({ method: 'POST', url: `/api/panels/${encodeURIComponent(PANEL)}/imports`, payload: form({}) });
    expect(apiResponse.statusCode, apiResponse.body.slice(0, 300)).toBe(200);
    expect(apiResponse.json().counts.ratings).toBe(year.ratings.length);
    expect(await exportCsv(api.db)).toBe(cliLong.exported);

    const web = await fresh();
    const { token, cookie } = csrfFrom(await web.app.inject({ url: '/upload' }));
    const webResponse = await web.app.inject({ method: 'POST', url: '/upload', headers: { cookie }, payload: form({ _csrf: token, panel: PANEL }) });
    expect(webResponse.statusCode, webResponse.body.slice(0, 300)).toBe(200);
    expect(await exportCsv(web.db)).toBe(cliLong.exported);

    // Re-import of the identical file: no-op, said so, and the store is unchanged.
    const again = await viaCli(longPath, 'cli-long.db');
    expect(again).toMatchObject({ exitCode: 0, outcome: 'unchanged' });
    expect(again.exported).toBe(cliLong.exported);
    const apiAgain = await api.app.inject({ method: 'POST', url: `/api/panels/${encodeURIComponent(PANEL)}/imports`, payload: form({}) });
    expect(apiAgain.json().outcome).toBe('unchanged');
    expect(await exportCsv(api.db)).toBe(cliLong.exported);
  });
});
