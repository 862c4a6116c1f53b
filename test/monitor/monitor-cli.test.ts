/**
 * `panel-steward refit` and `panel-steward flags --format json`, run as a person would (a child
 * process on a store file), compared with the service's GET /api/panels/:panel/flags.
 */
import { execFile } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../server/app.js';
import { openStore } from '../../store/open-store.js';
import { importRatings, smallPanel } from './helpers.js';

const run = promisify(execFile);
const folder = mkdtempSync(join(tmpdir(), 'panel-steward-monitor-cli-'));
const dbPath = join(folder, 'store.db');
const panel = smallPanel({ nWeeks: 8, faults: [{ kind: 'harsh', assessor: 'A03', size: 2.5 }] });

function cli(...args: string[]) {
  return run(process.execPath, ['--import', 'tsx', 'server/cli/main.ts', ...args], { cwd: process.cwd(), timeout: 120_000 });
}

beforeAll(async () => {
  const db = openStore(dbPath);
  await importRatings(db, panel);
  db.close();
}, 60_000);
afterAll(() => rmSync(folder, { recursive: true, force: true }));

describe('CLI', () => {
  it('flags --format json refits stale data first, then prints exactly what the API gives', async () => {
    const { stdout, stderr } = await cli('flags', '--panel', panel.panelName, '--db', dbPath, '--format', 'json');
    expect(stderr).toContain('recomputing');
    const printed = JSON.parse(stdout);
    expect(Array.isArray(printed)).toBe(true);
    expect(printed.some((f: { kind: string; assessor: string }) => f.kind === 'harsh' && f.assessor === 'A03')).toBe(true);
    // every field of the original contract in its order, then the case fields
    for (const f of printed) {
      expect(Object.keys(f)).toEqual(['kind', 'assessor', 'product', 'attribute', 'firstSession', 'severity', 'evidence', 'message', 'id', 'status', 'detectedSession', 'updatedSession']);
      expect(Number.isInteger(f.id)).toBe(true);
      expect(f.status).toBe('open');
      expect(panel.sessions.map((s) => s.label)).toContain(f.detectedSession);
      expect(panel.sessions.map((s) => s.label)).toContain(f.updatedSession);
    }
    expect(new Set(printed.map((f: { id: number }) => f.id)).size).toBe(printed.length);

    const db = openStore(dbPath);
    const app = await buildApp({ db });
    try {
      const api = await app.inject({ url: `/api/panels/${encodeURIComponent(panel.panelName)}/flags` });
      expect(api.json()).toEqual(printed);
      const since = panel.sessions[4].label;
      const sinceApi = await app.inject({ url: `/api/panels/${encodeURIComponent(panel.panelName)}/flags?since=${encodeURIComponent(since)}` });
      const sinceCli = await cli('flags', '--panel', panel.panelName, '--db', dbPath, '--since', since, '--format', 'json');
      expect(sinceCli.stderr).toBe('');
      expect(JSON.parse(sinceCli.stdout)).toEqual(sinceApi.json());
    } finally {
      await app.close();
      db.close();
    }
  }, 120_000);

  it('refit prints plain progress lines when stdout is not a terminal, then a summary', async () => {
    const { stdout } = await cli('refit', '--panel', panel.panelName, '--db', dbPath, '--threads', '1');
    expect(stdout).toMatch(/^session fits: \d+\/8$/m);
    expect(stdout).toMatch(/^period fits: \d+\/\d+$/m);
    expect(stdout).toMatch(/8 sessions and \d+ period fits recomputed, \d+ flags/);
    expect(stdout).not.toContain('\u001b['); // no terminal control codes in a pipe
  }, 120_000);

  it('unknown panel: one plain sentence, exit code 2', async () => {
    const failed = await cli('flags', '--panel', 'nope', '--db', dbPath, '--format', 'json').catch((e) => e);
    expect(failed.code).toBe(2);
    expect(failed.stderr.trim()).toBe('panel-steward flags: No panel named "nope" in this store.');
  });
});
