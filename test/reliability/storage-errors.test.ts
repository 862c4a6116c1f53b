/**
 * Errors of the disk under the store or the upload folder get a message with the path and the
 * remedy, in the app's own error shape: a full disk (ENOSPC while the upload is written, or
 * SQLITE_FULL from the store) → 507; a read-only store ("attempt to write a readonly database")
 * → 503; a missing folder → a clear message. The disk is never filled: a fake write error
 * stands for ENOSPC, and SQLite's page limit (max_page_count) makes the store report itself full.
 */
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { fileURLToPath } from 'node:url';
import BetterSqlite3 from 'better-sqlite3';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { buildApp } from '../../server/app.js';
import { storePathFromArgs, unexpectedErrorMessage } from '../../server/cli/cli-error.js';
import { describeStorageError } from '../../server/storage-errors.js';
import { openStore } from '../../store/open-store.js';
import { tempFolders } from '../helpers/temp-folders.js';
import { SMALL_SESSION_ROWS, freshApps, longCsv, postCsv } from '../http/http-helpers.js';

/** When set, every new file written under this folder fails with ENOSPC on its first write. */
const failWritesUnder: { folder: string | null } = { folder: null };

vi.mock('node:fs', async (importOriginal) => {
  const real = await importOriginal<typeof fs>();
  const createWriteStream = ((path: fs.PathLike, options?: unknown) => {
    const target = String(path);
    if (failWritesUnder.folder === null || !target.startsWith(failWritesUnder.folder)) {
      return real.createWriteStream(path, options as Parameters<typeof real.createWriteStream>[1]);
    }
    return new Writable({
      write(_chunk, _encoding, callback) {
        const error = Object.assign(new Error(`ENOSPC: no space left on device, write`), { code: 'ENOSPC', errno: -28, syscall: 'write', path: target });
        callback(error);
      },
    });
  }) as typeof real.createWriteStream;
  return { ...real, default: { ...real, createWriteStream }, createWriteStream };
});

const newFolder = tempFolders('ps-storage-errors-');
afterEach(() => {
  failWritesUnder.folder = null;
});

/** A long-form file of roughly `nRows` ratings (enough to need many store pages). */
function bigCsv(nRows: number): string {
  const rows: (string | number)[][] = [];
  for (let i = 0; i < nRows; i++) rows.push(['W01', '2026-01-05', `A${i % 40}`, `P${Math.floor(i / 40) % 25}`, Math.floor(i / 1000) + 1, `attribute ${Math.floor(i / 40 / 25) % 8}`, (i % 11) - 0.5 + 0.5]);
  return longCsv(rows);
}

describe('a full disk on an HTTP import', () => {
  const fresh = freshApps();

  it('while the upload is written (ENOSPC): 507, naming the upload folder and the remedy, nothing stored', async () => {
    const { app, db } = await fresh({ uploadTmpDir: newFolder() });
    failWritesUnder.folder = app.uploadDir;
    const response = await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS));
    expect(response.statusCode).toBe(507);
    const body = response.json();
    expect(body).toMatchObject({ ok: false, status: 507, code: 'DISK_FULL' });
    expect(body.error).toContain(app.uploadDir);
    expect(body.error).toMatch(/Free some space/);
    expect(body.error).not.toMatch(/Something went wrong/);
    expect((db.prepare('SELECT COUNT(*) AS n FROM rating').get() as { n: number }).n).toBe(0);
    // The same in the browser: an HTML page with the message, not fastify's body.
    const page = await app.inject({ method: 'POST', url: '/api/panels/oat/imports?scaleMin=0&scaleMax=10', headers: { 'content-type': 'text/csv', accept: 'text/html' }, payload: 'x' });
    expect(page.statusCode).toBe(507);
  });

  it('while the store is written (SQLITE_FULL): 507 naming the store file, and the store keeps nothing of it', async () => {
    const folder = newFolder();
    const storePath = join(folder, 'panel.db');
    const db = openStore(storePath);
    const app = await buildApp({ db, config: { uploadTmpDir: folder } });
    try {
      const pageCount = db.pragma('page_count', { simple: true }) as number;
      db.pragma(`max_page_count = ${pageCount + 8}`);
      const response = await postCsv(app, 'oat', bigCsv(20_000));
      expect(response.statusCode, response.body).toBe(507);
      const body = response.json();
      expect(body).toMatchObject({ ok: false, code: 'DISK_FULL' });
      expect(body.error).toContain(storePath);
      expect(body.error).toMatch(/nothing was written/);
      expect((db.prepare('SELECT COUNT(*) AS n FROM rating').get() as { n: number }).n).toBe(0);
      // With room again, the same file goes in.
      db.pragma('max_page_count = 1073741823');
      expect((await postCsv(app, 'oat', bigCsv(2_000))).statusCode).toBe(200);
    } finally {
      await app.close();
      db.close();
    }
  });
});

describe('a read-only store', () => {
  it('answers an import with 503, the store path and what to check', async () => {
    const folder = newFolder();
    const storePath = join(folder, 'panel.db');
    const db = openStore(storePath);
    const app = await buildApp({ db, config: { uploadTmpDir: folder } });
    // What a chmod 0444 file or a disk remounted read-only gives while the service runs: every
    // write fails with SQLITE_READONLY "attempt to write a readonly database".
    db.pragma('query_only = ON');
    try {
      const response = await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS));
      expect(response.statusCode, response.body).toBe(503);
      const body = response.json();
      expect(body).toMatchObject({ ok: false, code: 'STORE_READ_ONLY' });
      expect(body.error).toContain(storePath);
      expect(body.error).toMatch(/permission|read-only/);
      expect(body.error).not.toBe('attempt to write a readonly database');
    } finally {
      await app.close();
      db.close();
    }
  });
});

describe('body limits name the real limit', () => {
  const fresh = freshApps();

  it('a 2 MB JSON body to the thresholds endpoint is refused as larger than 1 MB', async () => {
    const { app } = await fresh();
    expect((await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS))).statusCode).toBe(200);
    const payload = JSON.stringify({ note: 'x'.repeat(2 * 1024 * 1024) });
    const response = await app.inject({ method: 'PUT', url: '/api/panels/oat/thresholds', headers: { 'content-type': 'application/json' }, payload });
    expect(response.statusCode).toBe(413);
    expect(response.json()).toMatchObject({ ok: false, code: 'BODY_TOO_LARGE' });
    expect(response.json().error).toContain('1 MB');
    expect(response.json().error).not.toContain('50 MB');
  });

  it('uploads keep their own limit in the message', async () => {
    const { app } = await fresh({ uploadLimitBytes: 1024 });
    const response = await postCsv(app, 'oat', bigCsv(500));
    expect(response.statusCode).toBe(413);
    expect(response.json().error).toContain('1 KB');
  });
});

describe('the command line says the same', () => {
  it('for a full disk, a read-only store and a missing folder', () => {
    const args = ['import', 'week.csv', '--panel', 'oat', '--db', '/data/lab/panel.db'];
    expect(storePathFromArgs(args)).toBe('/data/lab/panel.db');
    expect(storePathFromArgs(['export', '--db=/x/y.db'])).toBe('/x/y.db');

    const folder = newFolder();
    const storePath = join(folder, 'panel.db');
    openStore(storePath).close();
    const readonly = new BetterSqlite3(storePath, { readonly: true });
    let readonlyError: unknown;
    try {
      readonly.exec('CREATE TABLE t (x)');
    } catch (error) {
      readonlyError = error;
    }
    readonly.close();
    const cliReadonly = unexpectedErrorMessage(readonlyError, ['import', 'f.csv', '--db', storePath]);
    expect(cliReadonly).toBe(describeStorageError(readonlyError, { storePath })?.message);
    expect(cliReadonly).toContain(storePath);
    expect(cliReadonly).toMatch(/not mounted read-only/);

    const full = Object.assign(new Error('database or disk is full'), { code: 'SQLITE_FULL' });
    expect(unexpectedErrorMessage(full, args)).toMatch(/^The disk holding the store \/data\/lab\/panel\.db is full/);
    expect(unexpectedErrorMessage(new Error('other'), args)).toBe('other');
  });

  it('export to a folder that does not exist names the folder (a real run)', () => {
    const folder = newFolder();
    const root = fileURLToPath(new URL('../..', import.meta.url));
    const storePath = join(folder, 'panel.db');
    const db = openStore(storePath);
    db.close();
    fs.writeFileSync(join(folder, 'a.csv'), longCsv(SMALL_SESSION_ROWS));
    const cli = (args: string[]) => spawnSync(process.execPath, ['--import', 'tsx', join(root, 'server/cli/main.ts'), ...args], { cwd: root, encoding: 'utf8' });
    const seed = cli(['import', join(folder, 'a.csv'), '--panel', 'oat', '--scale', '0:10', '--db', storePath]);
    expect(seed.status, seed.stderr).toBe(0);
    const missing = join(folder, 'no', 'such');
    const run = cli(['export', '--panel', 'oat', '--db', storePath, '--out', join(missing, 'out.csv')]);
    expect(run.status).toBe(1);
    expect(run.stderr).not.toMatch(/\n\s+at /);
    expect(run.stderr).toContain(`The folder ${missing} does not exist`);
  });
});
