/**
 * Flags phase of the one-new-session refit (goal: one new session updates fits and
 * flags in under 1 s). Same data and pipeline as bench/refit-bench.ts (demo generator, seed 2026,
 * 12 assessors, 10 attributes; piscina pool; period tasks answered "not fitted" so that only the
 * work besides the period fits is timed), but the last session is imported again and again: odd
 * the first round imports it as generated, later rounds with one value changed (a different one each round), so every round has a new
 * data version, one session fit and a flag rebuild. Per round: the refit's wall time, its flags
 * phase (wall, from the end of the session fits to the flags progress event), the round trip of
 * the flags task to the worker, and the CPU time (user + system, all threads of the process) of
 * the refit and of its flags phase. The stored flags (key, severity, evidence, message) are
 * hashed per round, to compare two builds' output.
 *
 *   npx tsx bench/flags-phase-bench.ts [--rounds N] [--threads N] [--json]
 */
import { createHash } from 'node:crypto';
import { generatePanel } from '../demo/generate-panel.js';
import { createFitPool, type FitRunner } from '../server/fit-pool.js';
import { refitPanel } from '../server/refit.js';
import type { FitTask, FitTaskResult } from '../server/workers/fit-task-types.js';
import { openStore } from '../store/open-store.js';
import { createHistoryReadMemo } from '../store/panel-history.js';
import { importRatings as importInto } from '../test/monitor/helpers.js';

const argument = (name: string, fallback: number) => {
  const at = process.argv.indexOf(name);
  return at > 0 ? Number(process.argv[at + 1]) : fallback;
};
const rounds = argument('--rounds', 7);
const threads = argument('--threads', 2);

/** Period tasks answered without fitting; the flags task's round trip timed. */
function timedRunner(inner: FitRunner, flagsMs: number[]): FitRunner {
  return {
    mode: inner.mode,
    threads: inner.threads,
    async run<T extends FitTask>(task: T): Promise<FitTaskResult<T>> {
      if (task.type === 'period') return { attribute: task.attribute, result: null, problem: 'skipped' } as FitTaskResult<T>;
      const start = performance.now();
      const result = await inner.run(task);
      if (task.type === 'flags') flagsMs.push(performance.now() - start);
      return result;
    },
    close: () => inner.close(),
  };
}

const panel = generatePanel({ seed: 2026, nWeeks: 52, nAssessors: 12, startDate: '2026-01-05', faults: 'demo', nAttributes: 10 });
const lastSession = panel.sessions[panel.sessions.length - 1].label;
const last = panel.ratings.filter((r) => r.session === lastSession);
/** The last session with the value of rating `index` moved by half a point (a new data version). */
const changedAt = (index: number) => last.map((r, i) => (i === index ? { ...r, value: r.value >= panel.scale.max - 0.5 ? r.value - 0.5 : r.value + 0.5 } : r));
const db = openStore(':memory:');
await importInto(db, panel, panel.ratings.filter((r) => r.session !== lastSession));
const pool = createFitPool({ threads, mode: 'worker-threads' });
const flagsTaskMs: number[] = [];
const runner = timedRunner(pool, flagsTaskMs);
// As the refit service keeps one between jobs: each refit's flag build reads only what changed.
const readMemo = createHistoryReadMemo();
await refitPanel(db, panel.panelName, { runner, scope: 'all', readMemo });
await refitPanel(db, panel.panelName, { runner, scope: 'all', readMemo });
const rows: { totalMs: number; flagsPhaseMs: number; flagsTaskMs: number; cpuMs: number; flagsCpuMs: number; nFlags: number; fingerprint: string }[] = [];
for (let round = 0; round < rounds; round++) {
  await importInto(db, panel, round === 0 ? last : changedAt(round));
  const cpu = process.cpuUsage();
  const start = performance.now();
  let sessionsEnd = start;
  let flagsEnd = start;
  let sessionsEndCpu = cpu;
  let flagsEndCpu = cpu;
  const summary = await refitPanel(db, panel.panelName, {
    runner,
    scope: 'stale',
    readMemo,
    onProgress: (p) => {
      if (p.phase === 'sessions' && p.done === p.total) {
        sessionsEnd = performance.now();
        sessionsEndCpu = process.cpuUsage();
      }
      if (p.phase === 'flags') {
        flagsEnd = performance.now();
        flagsEndCpu = process.cpuUsage();
      }
    },
  });
  const totalMs = performance.now() - start;
  const used = process.cpuUsage(cpu);
  const stored = db.prepare('SELECT flag_key, severity, evidence_json, message FROM flag WHERE current = 1 ORDER BY flag_key').raw().all();
  rows.push({
    totalMs,
    flagsPhaseMs: flagsEnd - sessionsEnd,
    flagsTaskMs: flagsTaskMs[flagsTaskMs.length - 1],
    cpuMs: (used.user + used.system) / 1000,
    flagsCpuMs: (flagsEndCpu.user + flagsEndCpu.system - sessionsEndCpu.user - sessionsEndCpu.system) / 1000,
    nFlags: summary.nFlags,
    fingerprint: createHash('sha256').update(JSON.stringify(stored)).digest('hex').slice(0, 16),
  });
}
await pool.close();
db.close();
const med = (values: number[]) => [...values].sort((a, b) => a - b)[values.length >> 1];
if (process.argv.includes('--json')) {
  console.log(JSON.stringify({ rows, median: { totalMs: med(rows.map((r) => r.totalMs)), flagsPhaseMs: med(rows.map((r) => r.flagsPhaseMs)), flagsTaskMs: med(rows.map((r) => r.flagsTaskMs)), cpuMs: med(rows.map((r) => r.cpuMs)), flagsCpuMs: med(rows.map((r) => r.flagsCpuMs)) } }));
} else {
  console.log('| round | refit wall ms | flags phase wall ms | flags task round trip ms | refit CPU ms | flags phase CPU ms | flags | stored flags sha256 |');
  console.log('| ---: | ---: | ---: | ---: | ---: | ---: | ---: | --- |');
  rows.forEach((r, i) => console.log(`| ${i + 1} | ${r.totalMs.toFixed(0)} | ${r.flagsPhaseMs.toFixed(0)} | ${r.flagsTaskMs.toFixed(0)} | ${r.cpuMs.toFixed(0)} | ${r.flagsCpuMs.toFixed(0)} | ${r.nFlags} | ${r.fingerprint} |`));
  console.log(`medians: wall ${med(rows.map((r) => r.totalMs)).toFixed(0)} ms, flags phase ${med(rows.map((r) => r.flagsPhaseMs)).toFixed(0)} ms (CPU ${med(rows.map((r) => r.flagsCpuMs)).toFixed(0)} ms), flags task ${med(rows.map((r) => r.flagsTaskMs)).toFixed(0)} ms, refit CPU ${med(rows.map((r) => r.cpuMs)).toFixed(0)} ms`);
}
