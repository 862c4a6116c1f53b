/**
 * Crash safety: an import killed with SIGKILL at a random moment leaves the store
 * sound (integrity_check), holding the whole import or none of it, and usable afterwards.
 *
 * Bounded for CI: CRASH_RATINGS ratings (default 300,000) × CRASH_ROUNDS rounds (default 8);
 * e.g. `CRASH_RATINGS=1000000 CRASH_ROUNDS=40 npx vitest run test/reliability/crash.test.ts`.
 */
import { spawn } from 'node:child_process';
import { copyFileSync, existsSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { integrityCheck } from '../../store/backup.js';
import { fileInput, importRatings } from '../../store/import-ratings.js';
import { openStore, type Database } from '../../store/open-store.js';
import { tempFolder } from '../store/helpers.js';
import { designForRatings, nRatingsOf, writeSyntheticLongCsv } from '../store/synthetic-ratings.js';

const N_RATINGS = Number(process.env.CRASH_RATINGS ?? 300_000);
const ROUNDS = Number(process.env.CRASH_ROUNDS ?? 8);
const ROOT = join(import.meta.dirname, '..', '..');

/** What the store holds, in a few numbers that change with any rating, session or correction. */
function fingerprint(db: Database): string {
  const r = db
    .prepare(
      `SELECT count(*) AS n, total(value) AS sumValue, total(value * replicate) AS w1, total(value * session_id) AS w2, total(value * assessor_id * product_id) AS w3
       FROM rating`,
    )
    .get();
  const s = db.prepare('SELECT count(*) AS n, total(data_version) AS versions FROM session').get();
  const c = db.prepare('SELECT count(*) AS n, total(old_value) AS old FROM rating_correction').get();
  const i = db.prepare("SELECT count(*) AS n FROM import WHERE outcome = 'imported'").get();
  return JSON.stringify({ r, s, c, i });
}

function readFingerprint(path: string): { integrity: string[]; print: string } {
  const db = openStore(path);
  try {
    return { integrity: integrityCheck(db), print: fingerprint(db) };
  } finally {
    db.close();
  }
}

interface ChildRun {
  killed: boolean;
  exitedBy: string;
  /** From "ready" to "writing" and to the end, ms. */
  /** 0 when the child never got there. */
  writingAtMs: number;
  committedAtMs: number;
  endMs: number;
  stdout: string;
}

type KillPlan = { after: 'ready' | 'writing'; delayMs: number } | null;

/** Runs the child; SIGKILLs it `delayMs` after it prints the named marker (never, when null). */
function runChild(store: string, file: string, plan: KillPlan): Promise<ChildRun> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', join(ROOT, 'test/reliability/crash-child.ts'), store, file], { cwd: ROOT, stdio: ['ignore', 'pipe', 'pipe'] });
    let stdout = '';
    let stderr = '';
    let readyAt = 0;
    let writingAt = 0;
    let committedAt = 0;
    let killed = false;
    const armKill = (): void => {
      if (plan === null) return;
      setTimeout(() => {
        if (child.exitCode === null && child.signalCode === null) killed = child.kill('SIGKILL');
      }, plan.delayMs);
    };
    child.stdout.on('data', (chunk: Buffer) => {
      stdout += chunk.toString();
      if (readyAt === 0 && stdout.includes('ready\n')) {
        readyAt = performance.now();
        if (plan?.after === 'ready') armKill();
      }
      if (writingAt === 0 && stdout.includes('writing\n')) {
        writingAt = performance.now();
        if (plan?.after === 'writing') armKill();
      }
      if (committedAt === 0 && stdout.includes('committed\n')) committedAt = performance.now();
    });
    child.stderr.on('data', (chunk: Buffer) => void (stderr += chunk.toString()));
    child.on('error', reject);
    child.on('exit', (code, signal) => {
      if (!killed && code !== 0) reject(new Error(`child failed (${code ?? signal}): ${stderr}`));
      else
        resolve({
          killed,
          exitedBy: signal ?? String(code),
          writingAtMs: writingAt && writingAt - readyAt,
          committedAtMs: committedAt && committedAt - readyAt,
          endMs: performance.now() - readyAt,
          stdout,
        });
    });
  });
}

let folder: string;
let remove: () => void;
let startStore: string;
let bigFile: string;
let smallFile: string;

beforeAll(async () => {
  ({ folder, remove } = tempFolder('crash'));
  const design = designForRatings(N_RATINGS, 5);
  bigFile = join(folder, 'big.csv');
  await writeSyntheticLongCsv(bigFile, design);
  // The starting store already holds 10 of the file's sessions with other values, so the big
  // import both adds sessions and replaces sessions (corrections written).
  const baseFile = join(folder, 'base.csv');
  await writeSyntheticLongCsv(baseFile, { ...design, sessions: 10, seed: 99 });
  startStore = join(folder, 'start.db');
  const db = openStore(startStore);
  const report = await importRatings(db, { panel: 'crash', fileName: 'base.csv', source: 'cli', input: fileInput(baseFile), scale: { min: 0, max: 10 }, quarantine: false });
  expect(report.outcome).toBe('imported');
  db.close(); // checkpoints: the start store is one file
  expect(existsSync(`${startStore}-wal`)).toBe(false);
  smallFile = join(folder, 'after.csv');
  writeFileSync(smallFile, 'session,date,assessor,product,replicate,attribute,value\nAFTER,2030-01-07,A01,REF,1,crunchiness,5\nAFTER,2030-01-07,A02,REF,1,crunchiness,6\n');
  expect(nRatingsOf(design)).toBeGreaterThan(0);
}, 300_000);
afterAll(() => remove());

describe('SIGKILL during an import', () => {
  it(`leaves the whole import or none of it, ${ROUNDS} rounds`, async () => {
    const before = readFingerprint(startStore);
    // Reference: the same import run to the end.
    const referencePath = join(folder, 'reference.db');
    copyFileSync(startStore, referencePath);
    const reference = await runChild(referencePath, bigFile, null);
    expect(reference.stdout).toMatch(/writing\ncommitted\n/);
    expect(reference.stdout).toMatch(/done imported/);
    const whole = readFingerprint(referencePath);
    expect(whole.print).not.toBe(before.print);
    // Phase lengths, re-estimated after every round that reached them: on a busy machine they
    // vary from round to round, and a kill planned from a stale length would miss its phase.
    let readingMs = reference.writingAtMs;
    let writingMs = reference.committedAtMs - reference.writingAtMs;
    const reference0 = { readingMs, writingMs };

    const tally = { none: 0, whole: 0, killed: 0, killedWhileReading: 0, killedWhileWriting: 0 };
    const delays: string[] = [];
    // Kill moments: even rounds while the file is read and staged, odd rounds after the write
    // transaction began (up to 20 % past its usual end, so some land after the commit).
    // Spread evenly in shuffled order (golden-ratio sequence), reproducible.
    for (let round = 0; round < ROUNDS; round++) {
      const path = join(folder, `round-${round}.db`);
      copyFileSync(startStore, path);
      const fraction = ((round + 1) * 0.6180339887498949) % 1;
      const plan: KillPlan =
        round % 2 === 0 ? { after: 'ready', delayMs: Math.round(fraction * readingMs) } : { after: 'writing', delayMs: Math.round(fraction * 1.2 * writingMs) };
      delays.push(`${plan.after}+${plan.delayMs}`);
      const run = await runChild(path, bigFile, plan);
      if (run.writingAtMs > 0) readingMs = (readingMs + run.writingAtMs) / 2;
      if (run.committedAtMs > 0) writingMs = (writingMs + run.committedAtMs - run.writingAtMs) / 2;
      if (run.killed) {
        tally.killed += 1;
        if (plan.after === 'ready' && !run.stdout.includes('writing')) tally.killedWhileReading += 1;
        if (run.stdout.includes('writing') && !run.stdout.includes('committed')) tally.killedWhileWriting += 1;
      }
      const after = readFingerprint(path);
      expect(after.integrity).toEqual(['ok']);
      expect([before.print, whole.print]).toContain(after.print);
      const holdsWhole = after.print === whole.print;
      tally[holdsWhole ? 'whole' : 'none'] += 1;
      // The store is usable afterwards: a further import works and says what it did.
      const db = openStore(path);
      try {
        const next = await importRatings(db, { panel: 'crash', fileName: 'after.csv', source: 'cli', input: fileInput(smallFile), scale: { min: 0, max: 10 }, quarantine: false });
        expect(next.outcome).toBe('imported');
        expect(next.counts.sessionsNew).toBe(1);
        expect(integrityCheck(db)).toEqual(['ok']);
      } finally {
        db.close();
      }
    }
    console.log(
      `crash test: ${N_RATINGS} ratings, ${ROUNDS} rounds, ${tally.killed} killed by SIGKILL, ` +
        `(${tally.killedWhileReading} while reading, ${tally.killedWhileWriting} inside the write transaction), ` +
        `${tally.none} left none, ${tally.whole} left the whole import; uninterrupted: read ${Math.round(reference0.readingMs)} ms, write transaction ${Math.round(reference0.writingMs)} ms; ` +
        `kills at ${delays.join(' ')} ms`,
    );
    expect(tally.killed).toBeGreaterThan(0);
    if (ROUNDS >= 4) expect(tally.killedWhileWriting).toBeGreaterThan(0);
  }, 900_000);
});
