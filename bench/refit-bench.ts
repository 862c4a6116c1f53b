/**
 * Refit benchmark: a year of a panel — 52 weekly sessions × 10 attributes,
 * 12 assessors (demo generator: 5 products per session, 2 replicates) — refitted from scratch
 * (goal < 5 s), then one new session added and the fits and flags brought up to date (goal < 1 s).
 * Runs the real pipeline: store import, piscina worker pool, session fits, indices, period fits,
 * flag engine, store writes. The pool is warmed on a store of its own, so the timed year has no
 * stored period fits to start from; the new session's latest window starts from the stored fit
 * of the previous latest window (as in use). Phase times are wall-clock spans between the phase's first task
 * start and its last result. `--no-period` repeats the runs with period fits answered "not
 * fitted", to show how the time divides.
 *
 *   npx tsx bench/refit-bench.ts [--threads N] [--unbalanced]
 */
import { createHash } from 'node:crypto';
import { availableParallelism, cpus, loadavg } from 'node:os';
import { generatePanel, panelSettings, type GeneratedPanel } from '../demo/generate-panel.js';
import type { Rating } from '../domain/ratings.js';
import { createFitPool, type FitRunner } from '../server/fit-pool.js';
import { refitPanel, type RefitProgress, type RefitSummary } from '../server/refit.js';
import type { FitTask, FitTaskResult } from '../server/workers/fit-task-types.js';
import { importRatingEvents } from '../store/import-core.js';
import { openStore } from '../store/open-store.js';
import { createHistoryReadMemo } from '../store/panel-history.js';
import { dropRatings } from './missingness.js';

const threadsArg = process.argv.indexOf('--threads');
const threads = threadsArg > 0 ? Number(process.argv[threadsArg + 1]) : availableParallelism();

async function importInto(db: ReturnType<typeof openStore>, panel: GeneratedPanel, ratings: Rating[]): Promise<void> {
  const sha256 = createHash('sha256').update(JSON.stringify(ratings)).digest('hex');
  await importRatingEvents(
    db,
    { panel: panel.panelName, fileName: 'bench.csv', source: 'cli', sha256, quarantine: false, settings: panelSettings(panel) as never },
    ratings.map((rating, i) => ({ type: 'rating' as const, row: i + 2, column: rating.attribute, rating })),
  );
}

/** Period tasks answered without fitting (for the "without period fits" rows). */
function withoutPeriodFits(inner: FitRunner): FitRunner {
  return {
    mode: inner.mode,
    threads: inner.threads,
    run<T extends FitTask>(task: T): Promise<FitTaskResult<T>> {
      if (task.type === 'period') return Promise.resolve({ attribute: task.attribute, result: null, problem: 'skipped' } as FitTaskResult<T>);
      return inner.run(task);
    },
    close: () => inner.close(),
  };
}

interface Timed {
  summary: RefitSummary;
  totalMs: number;
  phaseMs: Record<RefitProgress['phase'], number>;
  /** CPU time of the whole process (main thread and workers) over the refit and over the period phase. */
  cpuMs: number;
  periodCpuMs: number;
}

const cpuNowMs = (): number => {
  const usage = process.cpuUsage();
  return (usage.user + usage.system) / 1000;
};

/** As the refit service keeps one between jobs: each refit's flag build reads only what changed. */
const readMemo = createHistoryReadMemo();

async function timedRefit(db: ReturnType<typeof openStore>, panel: string, runner: FitRunner, scope: 'all' | 'stale'): Promise<Timed> {
  const start = performance.now();
  const cpuStart = cpuNowMs();
  const first: Partial<Record<RefitProgress['phase'], number>> = {};
  const last: Partial<Record<RefitProgress['phase'], number>> = {};
  const firstCpu: Partial<Record<RefitProgress['phase'], number>> = {};
  const lastCpu: Partial<Record<RefitProgress['phase'], number>> = {};
  let previousEnd = start;
  let previousEndCpu = cpuStart;
  const summary = await refitPanel(db, panel, {
    runner,
    scope,
    readMemo,
    onProgress: (p) => {
      const now = performance.now();
      const cpu = cpuNowMs();
      if (first[p.phase] === undefined) {
        first[p.phase] = previousEnd;
        firstCpu[p.phase] = previousEndCpu;
      }
      last[p.phase] = now;
      lastCpu[p.phase] = cpu;
      if (p.done === p.total) {
        previousEnd = now;
        previousEndCpu = cpu;
      }
    },
  });
  const totalMs = performance.now() - start;
  const span = (phase: RefitProgress['phase']) => (first[phase] === undefined ? 0 : last[phase]! - first[phase]!);
  const cpuMs = cpuNowMs() - cpuStart;
  const periodCpuMs = firstCpu.periods === undefined ? 0 : lastCpu.periods! - firstCpu.periods;
  return { summary, totalMs, phaseMs: { sessions: span('sessions'), periods: span('periods'), flags: span('flags') }, cpuMs, periodCpuMs };
}

const generated = generatePanel({ seed: 2026, nWeeks: 52, nAssessors: 12, startDate: '2026-01-05', faults: 'demo', nAttributes: 10 });
/**
 * `--unbalanced`: the same panel as real panels produce it — the last assessor joins at session
 * 31 (earlier ratings removed), then 3 % of ratings and 12 whole assessor × product cells of a
 * session missing (bench/missingness.ts) — so most session fits take the general REML path.
 */
const unbalanced = process.argv.includes('--unbalanced');
const loadAtStart = loadavg();
const panel: GeneratedPanel = unbalanced ? { ...generated, ratings: unbalance(generated) } : generated;

function unbalance(source: GeneratedPanel): Rating[] {
  const labels = source.sessions.map((session) => session.label);
  const newcomer = [...new Set(source.ratings.map((rating) => rating.assessor))].sort().pop();
  const joined = new Set(labels.slice(30));
  const kept = source.ratings.filter((rating) => rating.assessor !== newcomer || joined.has(rating.session));
  return dropRatings(kept, { seed: 2027, missingShare: 0.03, emptyCells: 12 });
}
const lastSession = panel.sessions[panel.sessions.length - 1].label;
const rows: string[] = [];
for (const withPeriods of [true, false]) {
  const pool = createFitPool({ threads });
  const runner = withPeriods ? pool : withoutPeriodFits(pool);
  // Warm the pool (thread start, module load) so the year's time is the work, not the start-up.
  // On a store of its own: the timed year starts with no stored period fits (no warm starts).
  const warmUpDb = openStore(':memory:');
  await importInto(warmUpDb, panel, panel.ratings.filter((r) => r.session !== lastSession));
  await timedRefit(warmUpDb, panel.panelName, runner, 'all');
  warmUpDb.close();
  const db = openStore(':memory:');
  await importInto(db, panel, panel.ratings.filter((r) => r.session !== lastSession));
  const year = await timedRefit(db, panel.panelName, runner, 'all');
  await importInto(db, panel, panel.ratings.filter((r) => r.session === lastSession));
  const oneMore = await timedRefit(db, panel.panelName, runner, 'stale');
  await pool.close();
  db.close();
  const label = withPeriods ? 'everything' : 'without period fits';
  const fmt = (t: Timed, goalMs: number) =>
    `| ${(t.totalMs / 1000).toFixed(2)} s | ${(t.phaseMs.sessions / 1000).toFixed(2)} s | ${(t.phaseMs.periods / 1000).toFixed(2)} s | ${(t.phaseMs.flags / 1000).toFixed(2)} s | ${(t.cpuMs / 1000).toFixed(2)} s | ${(t.periodCpuMs / 1000).toFixed(2)} s | ${t.summary.sessionsRefitted.length} | ${t.summary.periodFitsRefitted} | ${t.summary.nFlags} | ${t.totalMs < goalMs ? 'met' : 'not met'} |`;
  rows.push(`| refit of the year (51 sessions), ${label} | ${fmt(year, 5000).slice(2)}`);
  rows.push(`| one new session, ${label} | ${fmt(oneMore, 1000).slice(2)}`);
}
console.log(`${cpus()[0]?.model ?? 'cpu'} × ${cpus().length}, ${threads} worker threads, Node ${process.version}`);
console.log(unbalanced ? 'data: unbalanced (a new assessor from session 31, 3 % of ratings and 12 whole cells missing)' : 'data: demo panel as generated');
console.log(`load average at the start ${loadAtStart.map((value) => value.toFixed(2)).join(' ')}, at the end ${loadavg().map((value) => value.toFixed(2)).join(' ')}`);
console.log('| run | total | session fits | period fits | flags | CPU, all threads | CPU, period phase | sessions fitted | period fits | flags | goal |');
console.log('| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |');
for (const row of rows) console.log(row);
