/**
 * Upload temp files: a private folder per service start (0700, random name), files 0600, and
 * the leftovers of killed starts removed at the next start — only our own prefix, only real
 * folders owned by this user, never through a symbolic link.
 */
import { spawnSync } from 'node:child_process';
import { chmodSync, existsSync, mkdirSync, readdirSync, rmSync, statSync, symlinkSync, utimesSync, writeFileSync } from 'node:fs';
import { request } from 'node:http';
import { basename, join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { buildApp } from '../../server/app.js';
import { ensurePrivateDir, PROCESS_START_MS, removeLeftoverUploadDirs, UPLOAD_DIR_PREFIX, UploadDirError } from '../../server/plugins/upload-dir.js';
import { openStore } from '../../store/open-store.js';
import { tempFolders } from '../helpers/temp-folders.js';
import { LONG_HEADER, SMALL_SESSION_ROWS, longCsv, postCsv } from '../http/http-helpers.js';

const newBase = tempFolders('ps-upload-dir-test-');

/** A pid that is certainly not running any more: a child that has exited. */
function deadPid(): number {
  const child = spawnSync(process.execPath, ['-e', 'process.stdout.write(String(process.pid))'], { encoding: 'utf8' });
  return Number(child.stdout);
}

async function waitUntilEmpty(dir: string): Promise<void> {
  for (let i = 0; i < 100 && readdirSync(dir).length > 0; i++) await new Promise((resolve) => setTimeout(resolve, 20));
  expect(readdirSync(dir)).toEqual([]);
}

const mode = (path: string) => statSync(path).mode & 0o777;

describe('the private upload folder', () => {
  it('is made per start with mode 0700 under the given folder, and removed when the app closes', async () => {
    const base = newBase();
    const db = openStore(':memory:');
    const app = await buildApp({ db, config: { uploadTmpDir: base } });
    const dir = app.uploadDir;
    expect(basename(dir).startsWith(`${UPLOAD_DIR_PREFIX}${process.pid}-${PROCESS_START_MS}-`)).toBe(true);
    expect(mode(dir)).toBe(0o700);
    const second = await buildApp({ db, config: { uploadTmpDir: base } });
    expect(second.uploadDir).not.toBe(dir);
    // An import goes through it and leaves nothing behind.
    expect((await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS))).statusCode).toBe(200);
    await waitUntilEmpty(dir); // removed once the response is out (an onResponse hook)
    await app.close();
    await second.close();
    expect(existsSync(dir)).toBe(false);
    expect(readdirSync(base)).toEqual([]);
    db.close();
  });

  it('holds an upload in progress as a 0600 file', async () => {
    const base = newBase();
    const db = openStore(':memory:');
    const app = await buildApp({ db, config: { uploadTmpDir: base } });
    await app.listen({ host: '127.0.0.1', port: 0 });
    const { port } = app.server.address() as { port: number };
    const body = `${LONG_HEADER}\n`;
    const req = request({
      host: '127.0.0.1',
      port,
      method: 'POST',
      path: '/api/panels/oat/imports?fileName=x.csv&scaleMin=0&scaleMax=10',
      headers: { 'content-type': 'text/csv', 'content-length': String(body.length + 100_000) },
    });
    req.on('error', () => undefined);
    req.write(body);
    let files: string[] = [];
    for (let i = 0; i < 100 && files.length === 0; i++) {
      await new Promise((resolve) => setTimeout(resolve, 20));
      files = readdirSync(app.uploadDir);
    }
    expect(files).toHaveLength(1);
    expect(mode(join(app.uploadDir, files[0]))).toBe(0o600);
    req.destroy();
    await app.close();
    db.close();
  });

  it('is made again (private) when a temp cleaner removed it, and a folder planted at its name is refused', async () => {
    const base = newBase();
    const db = openStore(':memory:');
    const app = await buildApp({ db, config: { uploadTmpDir: base } });
    rmSync(app.uploadDir, { recursive: true });
    expect((await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS))).statusCode).toBe(200);
    expect(mode(app.uploadDir)).toBe(0o700);
    chmodSync(app.uploadDir, 0o777); // as if another user had made it
    await expect(ensurePrivateDir(app.uploadDir)).rejects.toBeInstanceOf(UploadDirError);
    const refused = await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS));
    expect(refused.statusCode).toBeGreaterThanOrEqual(500);
    expect(refused.json()).toMatchObject({ ok: false });
    chmodSync(app.uploadDir, 0o700);
    await app.close();
    db.close();
  });
});

describe('leftovers of earlier starts', () => {
  it('removes our dead folders and old legacy files, and nothing else', async () => {
    const base = newBase();
    const dead = deadPid();
    const stale = join(base, `${UPLOAD_DIR_PREFIX}${dead}-1700000000000-AbC123`);
    mkdirSync(stale, { mode: 0o700 });
    writeFileSync(join(stale, 'panel-steward-upload-1.csv'), 'x'.repeat(1000));
    const reusedPid = join(base, `${UPLOAD_DIR_PREFIX}${process.pid}-${PROCESS_START_MS - 60_000}-XyZ789`);
    mkdirSync(reusedPid, { mode: 0o700 });
    const current = join(base, `${UPLOAD_DIR_PREFIX}${process.pid}-${PROCESS_START_MS}-Cur123`);
    mkdirSync(current, { mode: 0o700 });
    const alive = join(base, `${UPLOAD_DIR_PREFIX}${process.ppid}-1700000000000-Liv123`);
    mkdirSync(alive, { mode: 0o700 });
    const unrelated = join(base, 'panel-steward-uploads-notes');
    mkdirSync(unrelated);
    // A link with our name pointing at someone's folder: never followed, target untouched.
    const target = join(base, 'precious');
    mkdirSync(target);
    writeFileSync(join(target, 'keep.txt'), 'keep');
    const link = join(base, `${UPLOAD_DIR_PREFIX}${dead}-1700000000000-Lnk123`);
    symlinkSync(target, link);
    // The shared folder of earlier versions: old files go, a file written now stays.
    const legacy = join(base, 'panel-steward-uploads');
    mkdirSync(legacy);
    const oldFile = join(legacy, 'panel-steward-upload-old.csv');
    writeFileSync(oldFile, 'old');
    utimesSync(oldFile, new Date(PROCESS_START_MS - 7_200_000), new Date(PROCESS_START_MS - 7_200_000));
    const newFile = join(legacy, 'panel-steward-upload-new.csv');
    writeFileSync(newFile, 'new'); // an older version's upload may still be in progress
    utimesSync(newFile, new Date(PROCESS_START_MS - 600_000), new Date(PROCESS_START_MS - 600_000));
    const otherFile = join(legacy, 'someone-else.txt');
    writeFileSync(otherFile, 'x');
    utimesSync(otherFile, new Date(0), new Date(0));

    const removed = await removeLeftoverUploadDirs(base);
    expect(removed.sort()).toEqual([oldFile, reusedPid, stale].sort());
    for (const path of [current, alive, unrelated, target, join(target, 'keep.txt'), link, newFile, otherFile]) expect(existsSync(path), path).toBe(true);
    expect(existsSync(stale)).toBe(false);
  });

  it('are removed when the service starts', async () => {
    const base = newBase();
    const stale = join(base, `${UPLOAD_DIR_PREFIX}${deadPid()}-1700000000000-AbC123`);
    mkdirSync(stale, { mode: 0o700 });
    writeFileSync(join(stale, 'panel-steward-upload-1.csv'), 'x');
    const db = openStore(':memory:');
    const app = await buildApp({ db, config: { uploadTmpDir: base } });
    expect(existsSync(stale)).toBe(false);
    expect(readdirSync(base)).toEqual([basename(app.uploadDir)]);
    await app.close();
    db.close();
  });
});
