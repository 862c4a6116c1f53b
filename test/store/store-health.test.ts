/**
 * A store with bytes overwritten in the middle: it is found when opened, served read-only,
 * every write is refused with the store and the way out named, and the check and backup
 * commands say what is wrong. Real processes for the commands people type.
 */
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { basename, join, resolve } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import { afterEach, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { startServer } from '../../server/cli/serve-command.js';
import { backupStore, restoreStore } from '../../store/backup.js';
import { openStore, storeHealthOf } from '../../store/open-store.js';
import { quickCheckProblems, StoreDamagedError } from '../../store/store-health.js';
import { makeDamagedStore, type DamagedStore } from './damaged-store.js';
import { tempFolder } from './helpers.js';

const ROOT = resolve(import.meta.dirname, '../..');
const sha256 = (path: string): string => createHash('sha256').update(readFileSync(path)).digest('hex');

function cli(args: string[]): { status: number | null; stdout: string; stderr: string } {
  const result = spawnSync(process.execPath, ['--import', 'tsx', join(ROOT, 'server/cli/main.ts'), ...args], {
    cwd: ROOT,
    encoding: 'utf8',
    env: { ...process.env, PANEL_STEWARD_DB: '' },
    timeout: 60_000,
  });
  return { status: result.status, stdout: result.stdout, stderr: result.stderr };
}

let folder: string;
let remove: () => void;
let damaged: DamagedStore;
beforeAll(() => {
  process.env.LOG_LEVEL = 'silent';
});
beforeEach(async () => {
  ({ folder, remove } = tempFolder('health'));
  damaged = await makeDamagedStore(folder);
});
afterEach(() => remove());

describe('a store with bytes overwritten in the middle', () => {
  it('is damaged where quick_check looks: a rating-table page in the middle of the file', () => {
    expect(damaged.offset).toBeGreaterThan(damaged.fileSize / 4);
    expect(damaged.offset).toBeLessThan((3 * damaged.fileSize) / 4);
    const raw = new BetterSqlite3(damaged.path);
    try {
      const problems = quickCheckProblems(raw);
      expect(problems.length).toBeGreaterThan(0);
      expect(problems[0]).toMatch(new RegExp(`page ${damaged.page}\\b`));
    } finally {
      raw.close();
    }
  });

  it('is refused by openStore with the path and the restore command, or opened read-only when asked', () => {
    const before = sha256(damaged.path);
    let thrown: unknown;
    try {
      openStore(damaged.path).close();
    } catch (error) {
      thrown = error;
    }
    expect(thrown).toBeInstanceOf(StoreDamagedError);
    expect((thrown as Error).message).toContain(damaged.path);
    expect((thrown as Error).message).toContain(`panel-steward restore --from BACKUP-FILE --db ${damaged.path}`);

    const db = openStore(damaged.path, { ifDamaged: 'read-only' });
    try {
      expect(storeHealthOf(db).ok).toBe(false);
      expect(() => db.prepare("UPDATE panel SET name = 'x'").run()).toThrow(/readonly|query_only/i);
    } finally {
      db.close();
    }
    expect(sha256(damaged.path)).toBe(before);
  });

  it('serve starts read-only: /healthz is 503 with the reason, pages give 503 not 500, uploads are refused', async () => {
    const before = sha256(damaged.path);
    let printed = '';
    const server = await startServer({ db: damaged.path, port: '0' }, { write: (text: string) => (printed += text) });
    try {
      expect(printed).toMatch(/Warning: The store .*damaged\.db is damaged/);
      const health = await fetch(`${server.url}healthz`);
      expect(health.status).toBe(503);
      const body = (await health.json()) as { ok: boolean; status: number; code: string; error: string; errors: { message: string }[] };
      expect(body).toMatchObject({ ok: false, status: 503, code: 'STORE_DAMAGED' });
      expect(body.error).toContain('damaged.db is damaged');
      expect(body.error).toContain('panel-steward restore --from BACKUP-FILE --db damaged.db');
      expect(body.error).not.toContain(folder); // pages show the file name, never the path
      expect(body.errors[0].message).toMatch(/page \d+/);

      // Every session page either shows (its pages are sound) or says the store is damaged.
      const statuses: number[] = [];
      for (const session of ['W001', 'W002', 'W003', 'W004']) {
        const page = await fetch(`${server.url}panels/crisps/sessions/${session}.json`);
        statuses.push(page.status);
        if (page.status !== 200) expect(((await page.json()) as { code: string }).code).toBe('STORE_DAMAGED');
      }
      expect(statuses.every((s) => s === 200 || s === 503)).toBe(true);
      expect(statuses).toContain(503);
      // Pages that do not read the damaged page still show; none answers a bare 500.
      expect((await fetch(`${server.url}`, { headers: { accept: 'text/html' } })).status).toBe(200);
      for (const path of ['panels/crisps.json', 'panels/crisps/monitor.json', 'panels/crisps/monitor/flags.json', 'imports.json']) {
        expect([200, 503]).toContain((await fetch(`${server.url}${path}`)).status);
      }

      const upload = await fetch(`${server.url}api/panels/crisps/imports?fileName=w.csv&scaleMin=0&scaleMax=10`, {
        method: 'POST',
        headers: { 'content-type': 'text/csv' },
        body: 'session,date,assessor,product,replicate,attribute,value\nX1,2026-01-05,A01,P1,1,sweet,4\n',
      });
      expect(upload.status).toBe(503);
      expect(((await upload.json()) as { code: string }).code).toBe('STORE_DAMAGED');
      const thresholds = await fetch(`${server.url}api/panels/crisps/thresholds`, { method: 'PUT', headers: { 'content-type': 'application/json' }, body: '{}' });
      expect(thresholds.status).toBe(503);
      const refit = await fetch(`${server.url}api/panels/crisps/refit`, { method: 'POST' });
      expect(refit.status).toBe(503);
    } finally {
      await server.stop();
    }
    expect(sha256(damaged.path)).toBe(before);
  });

  it('import, refit and backup refuse with exit 1 and the way out; nothing is written', () => {
    const before = sha256(damaged.path);
    const csv = join(folder, 'w.csv');
    writeFileSync(csv, 'session,date,assessor,product,replicate,attribute,value\nX1,2026-01-05,A01,P1,1,sweet,4\n');

    const imported = cli(['import', csv, '--panel', 'crisps', '--db', damaged.path, '--scale', '0:10']);
    expect(imported.status).toBe(1);
    expect(imported.stderr).toContain(`The store ${damaged.path} is damaged`);
    expect(imported.stderr).toContain(`panel-steward restore --from BACKUP-FILE --db ${damaged.path}`);

    const refit = cli(['refit', '--panel', 'crisps', '--db', damaged.path, '--threads', '1']);
    expect(refit.status).toBe(1);
    expect(refit.stderr).toContain(`The store ${damaged.path} is damaged`);

    const out = join(folder, 'copy.db');
    const backup = cli(['backup', '--db', damaged.path, '--out', out]);
    expect(backup.status).toBe(1);
    expect(backup.stderr).toContain(`the source store ${damaged.path} is damaged`);
    expect(existsSync(out)).toBe(false);

    expect(sha256(damaged.path)).toBe(before);
  }, 120_000);

  it('check prints the problems and exits 1 (text and JSON); a sound backup restores over it', async () => {
    const text = cli(['check', '--db', damaged.path]);
    expect(text.status).toBe(1);
    expect(text.stdout).toContain(`${damaged.path} is damaged`);
    expect(text.stdout).toMatch(new RegExp(`page ${damaged.page}\\b`));
    const json = cli(['check', '--db', damaged.path, '--format', 'json']);
    expect(json.status).toBe(1);
    const result = JSON.parse(json.stdout) as { ok: boolean; problems: string[]; check: string };
    expect(result).toMatchObject({ ok: false, check: 'integrity_check' });
    expect(result.problems.length).toBeGreaterThan(0);

    // A sound store: exit 0; then restore it over the damaged one (no --force needed).
    const sound = join(folder, 'sound.db');
    const db = openStore(sound);
    await backupStore(db, join(folder, 'sound-backup.db'));
    db.close();
    const ok = cli(['check', '--db', join(folder, 'sound-backup.db')]);
    expect(ok.status).toBe(0);
    expect(ok.stdout).toMatch(/^ok: /);
    const restored = await restoreStore(join(folder, 'sound-backup.db'), damaged.path);
    expect(restored.previousSavedAs).toMatch(/damaged\.db\.damaged-/);
    expect(existsSync(restored.previousSavedAs!)).toBe(true);
    const reopened = openStore(damaged.path);
    expect(storeHealthOf(reopened).ok).toBe(true);
    reopened.close();
    expect(basename(damaged.path)).toBe('damaged.db');
  }, 120_000);
});
