/**
 * Concurrency under load, bounded for CI: the real service in its own process
 * on 127.0.0.1 gets 16 uploads over 4 connections at once (each a different weekly file, every
 * fourth one a repeat of an earlier file) while 8 connections keep reading pages and JSON
 * (autocannon), a few seconds in all. Then, with the service stopped, the store is counted:
 * every file imported exactly once, nothing lost, nothing duplicated, every session whole, and
 * no "database is locked" and no 5xx ever reached a client.
 * The p99 latencies are printed for the README's Reliability section.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { createRequire } from 'node:module';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { openStore } from '../../store/open-store.js';

interface Histogram {
  p50: number;
  p99: number;
  max: number;
}
interface AutocannonResult {
  latency: Histogram;
  requests: { total: number };
  errors: number;
  timeouts: number;
  non2xx: number;
  statusCodeStats: Record<string, { count: number }>;
}
interface AutocannonRequest {
  method?: string;
  path?: string;
  headers?: Record<string, string>;
  body?: string;
  setupRequest?: (request: AutocannonRequest) => AutocannonRequest;
  onResponse?: (status: number, body: string) => void;
}
/** A run in progress: awaitable, and stoppable before its duration is over. */
type AutocannonRun = PromiseLike<AutocannonResult> & { stop: () => void };
type Autocannon = (options: {
  url: string;
  connections: number;
  duration?: number;
  amount?: number;
  requests: AutocannonRequest[];
  timeout?: number;
}) => AutocannonRun;
// autocannon ships no types; its documented options and results are declared above.
const autocannon = createRequire(import.meta.url)('autocannon') as Autocannon;

const ROOT = resolve(import.meta.dirname, '../..');
/** Uploads sent (each answered before the run ends); reads run alongside until they are done. */
const N_UPLOADS = Number(process.env.LOAD_UPLOADS ?? 16);
const ASSESSORS = ['A01', 'A02', 'A03', 'A04', 'A05', 'A06'];
const PRODUCTS = ['REF', 'P1', 'P2'];
const ATTRIBUTES = ['sweet', 'sour', 'oat', 'creamy'];
const N_RATINGS_PER_FILE = ASSESSORS.length * PRODUCTS.length * 2 * ATTRIBUTES.length; // 144

/** Weekly file number k: its own session label and date, values that depend on k. */
function weeklyFile(k: number): string {
  const date = new Date(Date.UTC(2024, 0, 1) + k * 86_400_000).toISOString().slice(0, 10);
  const lines = ['session,date,assessor,product,replicate,attribute,value'];
  for (const assessor of ASSESSORS)
    for (const product of PRODUCTS)
      for (const replicate of [1, 2])
        for (const [a, attribute] of ATTRIBUTES.entries()) {
          const value = ((k * 7 + a * 3 + replicate + assessor.charCodeAt(2) + product.length) % 100) / 10;
          lines.push(`L${k},${date},${assessor},${product},${replicate},${attribute},${value}`);
        }
  return `${lines.join('\n')}\n`;
}

let server: ChildProcess | null = null;
const folder = mkdtempSync(join(tmpdir(), 'panel-steward-load-'));
afterAll(() => {
  if (server && server.exitCode === null) server.kill('SIGKILL');
  rmSync(folder, { recursive: true, force: true });
});

/** Starts `panel-steward serve` on a free port and resolves with its URL. */
function startService(dbPath: string): Promise<string> {
  return new Promise((resolvePromise, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', join(ROOT, 'server/cli/main.ts'), 'serve', '--db', dbPath, '--port', '0'], {
      cwd: ROOT,
      env: { ...process.env, LOG_LEVEL: 'warn', HOST: '127.0.0.1', PANEL_STEWARD_TOKEN: '' },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    server = child;
    let output = '';
    const timer = setTimeout(() => reject(new Error(`service did not start:\n${output}`)), 30_000);
    const onData = (chunk: Buffer) => {
      output += chunk.toString();
      const match = /serving (http:\/\/127\.0\.0\.1:\d+)\//.exec(output);
      if (match) {
        clearTimeout(timer);
        resolvePromise(match[1]);
      }
    };
    child.stdout?.on('data', onData);
    child.stderr?.on('data', onData);
    child.on('exit', (code) => reject(new Error(`service exited with ${code}:\n${output}`)));
  });
}

function stopService(): Promise<number | null> {
  return new Promise((resolvePromise) => {
    if (!server || server.exitCode !== null) return resolvePromise(server?.exitCode ?? null);
    server.once('exit', (code) => resolvePromise(code));
    server.kill('SIGTERM');
  });
}

describe('load: simultaneous uploads and report requests', () => {
  it('loses no import, duplicates none, and never shows a lock error or a 5xx', async () => {
    const dbPath = join(folder, 'load.db');
    const url = await startService(dbPath);

    // Seed one session so the report pages have something to show from the start.
    const seed = await fetch(`${url}/api/panels/load/imports?scaleMin=0&scaleMax=10&fileName=seed.csv`, {
      method: 'POST',
      headers: { 'content-type': 'text/csv' },
      body: weeklyFile(0),
    });
    expect(seed.status).toBe(200);

    const answersByFile = new Map<number, string[]>();
    const problems: string[] = [];
    let nextFile = 1;
    const sentFiles = new Set<number>();
    const inspect = (what: string) => (status: number, body: string) => {
      if (status >= 500) problems.push(`${what}: ${status} ${body.slice(0, 200)}`);
      if (/database is locked|SQLITE_BUSY/i.test(body)) problems.push(`${what}: lock error reached the client`);
    };

    const startedAt = performance.now();
    const uploads = autocannon({
      url,
      connections: 4,
      amount: N_UPLOADS,
      timeout: 30,
      requests: [
        {
          method: 'POST',
          headers: { 'content-type': 'text/csv' },
          setupRequest: (request) => {
            const n = nextFile++;
            // every fourth upload repeats an earlier file: it must come back "unchanged"
            const k = n % 4 === 0 ? n - 1 : n;
            sentFiles.add(k);
            return {
              ...request,
              path: `/api/panels/load/imports?scaleMin=0&scaleMax=10&fileName=week-${k}.csv`,
              body: weeklyFile(k),
            };
          },
          onResponse: (status, body) => {
            inspect('upload')(status, body);
            try {
              const answer = JSON.parse(body) as { outcome: string; fileName: string };
              const k = Number(/week-(\d+)\.csv/.exec(answer.fileName)?.[1]);
              answersByFile.set(k, [...(answersByFile.get(k) ?? []), answer.outcome]);
            } catch {
              problems.push(`upload answer is not JSON: ${body.slice(0, 200)}`);
            }
          },
        },
      ],
    });
    const readPaths = ['/.json', '/panels/load.json', '/panels/load', '/panels/load/sessions/L0.json', '/imports.json', '/api/panels', '/healthz'];
    const reads = autocannon({
      url,
      connections: 8,
      duration: 300, // stopped when the uploads are done
      timeout: 30,
      requests: readPaths.map((path) => ({ method: 'GET', path, onResponse: inspect(`GET ${path}`) })),
    });
    const uploadResult = await uploads;
    reads.stop();
    const readResult = await reads;
    const elapsedSeconds = (performance.now() - startedAt) / 1000;
    const exitCode = await stopService();

    const nImportedAnswers = [...answersByFile.values()].flat().filter((outcome) => outcome === 'imported').length;
    const nUnchangedAnswers = [...answersByFile.values()].flat().filter((outcome) => outcome === 'unchanged').length;
    console.log(
      [
        `load (${elapsedSeconds.toFixed(1)} s, 4 upload + 8 read connections on 127.0.0.1):`,
        `  uploads: ${uploadResult.requests.total} requests, ${nImportedAnswers} imported, ${nUnchangedAnswers} unchanged repeats, p50 ${uploadResult.latency.p50} ms, p99 ${uploadResult.latency.p99} ms, max ${uploadResult.latency.max} ms`,
        `  reads:   ${readResult.requests.total} requests, p50 ${readResult.latency.p50} ms, p99 ${readResult.latency.p99} ms, max ${readResult.latency.max} ms`,
        `  errors ${uploadResult.errors + readResult.errors}, timeouts ${uploadResult.timeouts + readResult.timeouts}, non-2xx ${uploadResult.non2xx + readResult.non2xx}`,
      ].join('\n'),
    );

    expect(problems).toEqual([]);
    expect(exitCode).toBe(0);
    expect(uploadResult.errors + readResult.errors).toBe(0);
    expect(uploadResult.non2xx + readResult.non2xx).toBe(0);
    expect(uploadResult.requests.total).toBe(N_UPLOADS);
    expect(answersByFile.size).toBe(sentFiles.size);
    // every file that was answered was imported exactly once, however often it was sent
    for (const [k, outcomes] of answersByFile) {
      expect(outcomes.filter((outcome) => outcome === 'imported'), `week-${k}`).toHaveLength(1);
    }

    // The store after a clean stop: every file sent is there, once, and whole.
    const db = openStore(dbPath);
    const count = (sql: string) => (db.prepare(sql).get() as { n: number }).n;
    expect(db.pragma('integrity_check', { simple: true })).toBe('ok');
    const storedLabels = (db.prepare('SELECT label FROM session').all() as { label: string }[]).map((row) => Number(row.label.slice(1)));
    expect([...storedLabels].sort((a, b) => a - b)).toEqual([0, ...[...sentFiles].sort((a, b) => a - b)]);
    expect(nImportedAnswers).toBe(sentFiles.size);
    expect(count("SELECT COUNT(*) AS n FROM import WHERE outcome = 'imported'")).toBe(storedLabels.length);
    expect(count("SELECT COUNT(*) AS n FROM (SELECT content_sha256 FROM import WHERE outcome = 'imported' GROUP BY content_sha256 HAVING COUNT(*) > 1)")).toBe(0);
    expect(count('SELECT COUNT(*) AS n FROM rating')).toBe(storedLabels.length * N_RATINGS_PER_FILE);
    console.log(`  store: ${storedLabels.length} sessions (${sentFiles.size} distinct files sent), ${count('SELECT COUNT(*) AS n FROM rating')} ratings, integrity ok`);
    db.close();
  }, 120_000);
});
