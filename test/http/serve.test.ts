/**
 * `panel-steward serve` as people run it: environment variables, the access token, and a clean
 * stop on SIGTERM that lets the import in progress finish (the store then holds all of it).
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { openStore } from '../../store/open-store.js';

const ROOT = resolve(import.meta.dirname, '../..');
const children: ChildProcess[] = [];
const folders: string[] = [];
afterEach(() => {
  for (const child of children.splice(0)) if (child.exitCode === null) child.kill('SIGKILL');
  for (const folder of folders.splice(0)) rmSync(folder, { recursive: true, force: true });
});

interface Service {
  child: ChildProcess;
  url: string;
  output: () => string;
  exited: Promise<number | null>;
}

function serve(args: string[], env: Record<string, string>): Promise<Service> {
  return new Promise((resolvePromise, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', join(ROOT, 'server/cli/main.ts'), 'serve', ...args], {
      cwd: ROOT,
      env: { ...process.env, LOG_LEVEL: 'warn', PANEL_STEWARD_TOKEN: '', HOST: '', PORT: '', ...env },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    children.push(child);
    let output = '';
    const exited = new Promise<number | null>((done) => child.on('exit', (code) => done(code)));
    const timer = setTimeout(() => reject(new Error(`service did not start:\n${output}`)), 30_000);
    const onData = (chunk: Buffer) => {
      output += chunk.toString();
      const match = /serving (http:\/\/[^ ]+)\//.exec(output);
      if (match) {
        clearTimeout(timer);
        resolvePromise({ child, url: match[1], output: () => output, exited });
      }
    };
    child.stdout?.on('data', onData);
    child.stderr?.on('data', onData);
    void exited.then((code) => reject(new Error(`service exited with ${code}:\n${output}`)));
  });
}

function freePort(): Promise<number> {
  return new Promise((resolvePromise) => {
    const probe = createServer();
    probe.listen(0, '127.0.0.1', () => {
      const { port } = probe.address() as { port: number };
      probe.close(() => resolvePromise(port));
    });
  });
}

function tempStore(): string {
  const folder = mkdtempSync(join(tmpdir(), 'panel-steward-serve-'));
  folders.push(folder);
  return join(folder, 'store.db');
}

/** A long-form file of nSessions × 12 assessors × 5 products × 2 replicates × 10 attributes. */
function bigCsv(nSessions: number): { text: string; nRatings: number } {
  const lines = ['session,date,assessor,product,replicate,attribute,value'];
  for (let s = 0; s < nSessions; s += 1) {
    const date = new Date(Date.UTC(2025, 0, 6) + s * 7 * 86_400_000).toISOString().slice(0, 10);
    for (let a = 1; a <= 12; a += 1)
      for (let p = 1; p <= 5; p += 1)
        for (let r = 1; r <= 2; r += 1)
          for (let t = 1; t <= 10; t += 1) lines.push(`W${s},${date},A${a},P${p},${r},attr${t},${(a * 3 + p * 7 + r + t + s) % 11}`);
  }
  return { text: `${lines.join('\n')}\n`, nRatings: lines.length - 1 };
}

describe('panel-steward serve', () => {
  it('honours HOST, PORT and PANEL_STEWARD_DB, and requires a token when one is set', async () => {
    const port = await freePort();
    const token = 'token-for-the-serve-test-0001';
    const service = await serve([], { HOST: '127.0.0.1', PORT: String(port), PANEL_STEWARD_DB: tempStore(), PANEL_STEWARD_TOKEN: token });
    expect(service.url).toBe(`http://127.0.0.1:${port}`);
    expect(service.output()).toContain('every page and API call needs it');
    expect(service.output()).not.toContain(token); // a token given by the environment is not echoed
    expect((await fetch(`${service.url}/healthz`)).status).toBe(200);
    expect((await fetch(`${service.url}/api/panels`)).status).toBe(401);
    expect((await fetch(`${service.url}/api/panels`, { headers: { authorization: `Bearer ${token}` } })).status).toBe(200);
    service.child.kill('SIGTERM');
    expect(await service.exited).toBe(0);
  }, 60_000);

  it('refuses a bad port with a plain message', async () => {
    await expect(serve(['--port', 'eighty'], { PANEL_STEWARD_DB: tempStore() })).rejects.toThrow(/port must be a whole number from 0 to 65535/);
  }, 60_000);

  it('finishes the import in progress on SIGTERM, then stops; the store holds all of it', async () => {
    const dbPath = tempStore();
    const service = await serve(['--db', dbPath, '--port', '0'], {});
    const { text, nRatings } = bigCsv(20); // 24,000 ratings
    const upload = fetch(`${service.url}/api/panels/big/imports?scaleMin=0&scaleMax=10&fileName=year.csv`, {
      method: 'POST',
      headers: { 'content-type': 'text/csv' },
      body: text,
    });
    // wait until the service has the whole file and the import is queued or running
    let isImporting = false;
    for (let attempt = 0; attempt < 2000 && !isImporting; attempt += 1) {
      const health = (await (await fetch(`${service.url}/healthz`)).json()) as { importsWaiting: number };
      isImporting = health.importsWaiting > 0;
      if (!isImporting) await new Promise((wait) => setTimeout(wait, 5));
    }
    expect(isImporting).toBe(true);
    service.child.kill('SIGTERM');
    const answer = await upload;
    expect(answer.status).toBe(200);
    const report = (await answer.json()) as { outcome: string; counts: { ratings: number } };
    expect(report.outcome).toBe('imported');
    expect(report.counts.ratings).toBe(nRatings);
    expect(await service.exited).toBe(0);

    const db = openStore(dbPath);
    expect(db.pragma('integrity_check', { simple: true })).toBe('ok');
    expect((db.prepare('SELECT COUNT(*) AS n FROM rating').get() as { n: number }).n).toBe(nRatings);
    db.close();
  }, 120_000);
});
