/**
 * Model-fitting benchmark: panel-steward's mixed-model engine against
 * lme4 + lmerTest, whole process against whole process, on the same simulated CSV.
 *
 *   npm run build && npx tsx bench/fit-bench.ts [--reps N] [--r-year-reps N] [--skip-r] [--tasks year,session,…]
 *     [--data balanced,unbalanced] [--before DIR --before-label TEXT]
 *
 * Writes bench/out/fit-bench-year.csv (seeded: 52 sessions × 10 attributes × 12 assessors ×
 * 6 products × 2 replicates) and, for `unbalanced`, fit-bench-year-unbalanced.csv (the same year
 * with 3 % of ratings and 12 whole assessor × product cells missing and a 13th assessor from
 * session 40), then for each task starts fresh processes — this script in worker
 * mode (`--task T --csv F`) and `Rscript bench/fit-bench.R T F` — and reports the median wall
 * time of the whole process and the median in-process fitting time (wall and CPU) each reports;
 * CPU time is the steadier figure on a shared machine.
 * For the year it also times the user-facing command, `node bin/panel-steward analyze CSV --format
 * json > /dev/null` (compiled dist/), against the same lmerTest year processes.
 * Tasks: one per-session fit (S01, attr01); all 520 per-session fits (REML + Satterthwaite
 * product test); one period fit over 12 sessions and over 52 (attr02).
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { loadavg } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { Observation } from '../domain/ratings.js';
import { fitPeriodModel } from '../analysis/lmm/fit-period-model.js';
import { fitSessionModel } from '../analysis/lmm/fit-session-model.js';
import { seededRandom } from '../analysis/reliability/seeded-random.js';
import { dropRatings, type MissingnessOptions } from './missingness.js';

const here = dirname(fileURLToPath(import.meta.url));
const CLI = join(here, '..', 'bin', 'panel-steward');
const COMPILED_ENTRY = join(here, '..', 'dist', 'server', 'cli', 'main.js');
const TASKS = ['session', 'year', 'period12', 'period52'] as const;
type Task = (typeof TASKS)[number];

export interface PanelDesign {
  sessions: number;
  attributes: number;
  assessors: number;
  products: number;
  replicates: number;
  seed: number;
  /** A new assessor joins from this session (1-based) on, with effects of their own. */
  newAssessorFromSession?: number;
  /** Ratings and whole assessor × product cells missing (bench/missingness.ts). */
  missingness?: Omit<MissingnessOptions, 'seed'>;
}

export const YEAR_DESIGN: PanelDesign = { sessions: 52, attributes: 10, assessors: 12, products: 6, replicates: 2, seed: 20261202 };
/**
 * The same year as panels produce it: 3 % of ratings missing at random, 12 whole assessor ×
 * product cells missing, and a 13th assessor from session 40 on.
 */
export const UNBALANCED_YEAR_DESIGN: PanelDesign = { ...YEAR_DESIGN, newAssessorFromSession: 40, missingness: { missingShare: 0.03, emptyCells: 12 } };

export function simulatePanel(design: PanelDesign): Observation[] {
  const uniform = seededRandom(design.seed);
  const normalFrom =
    (random: () => number) =>
    (sd: number): number =>
      sd * Math.sqrt(-2 * Math.log(1 - random())) * Math.cos(2 * Math.PI * random());
  const normal = normalFrom(uniform);
  // The new assessor draws from a stream of their own: the other assessors' data stay as in the complete design.
  const newcomerNormal = normalFrom(seededRandom(design.seed + 1));
  const rows: Observation[] = [];
  const pad = (value: number): string => String(value).padStart(2, '0');
  for (let j = 0; j < design.attributes; j++) {
    const attribute = `attr${pad(j + 1)}`;
    // Attribute-specific SDs: assessor level, interaction, residual, session drifts, product instability.
    const sdAssessor = 0.3 + 0.08 * j;
    const sdInteraction = j % 3 === 0 ? 0.05 : 0.25 + 0.05 * j;
    const sdResidual = 0.7 + 0.03 * j;
    const sdSession = 0.3;
    const sdAssessorSession = 0.25;
    const sdProductSession = j % 4 === 0 ? 0 : 0.2;
    const productEffects = Array.from({ length: design.products }, (_, p) => (p - (design.products - 1) / 2) * (0.2 + 0.05 * j));
    const assessorEffects = Array.from({ length: design.assessors }, () => normal(sdAssessor));
    const interaction = Array.from({ length: design.assessors * design.products }, () => normal(sdInteraction));
    const sessionShifts: number[] = [];
    const productSessions: number[][] = [];
    for (let s = 0; s < design.sessions; s++) {
      const sessionShift = normal(sdSession);
      const assessorSession = Array.from({ length: design.assessors }, () => normal(sdAssessorSession));
      const productSession = Array.from({ length: design.products }, () => normal(sdProductSession));
      sessionShifts.push(sessionShift);
      productSessions.push(productSession);
      for (let a = 0; a < design.assessors; a++) {
        for (let p = 0; p < design.products; p++) {
          for (let r = 0; r < design.replicates; r++) {
            const value =
              5 + productEffects[p] + assessorEffects[a] + interaction[a * design.products + p] + sessionShift + assessorSession[a] + productSession[p] + normal(sdResidual);
            rows.push({
              session: `S${pad(s + 1)}`,
              assessor: `A${pad(a + 1)}`,
              product: String(101 + p * 17),
              replicate: r + 1,
              attribute,
              value: Math.round(value * 100) / 100,
            });
          }
        }
      }
    }
    if (design.newAssessorFromSession !== undefined) {
      const level = newcomerNormal(sdAssessor);
      const newcomerInteraction = Array.from({ length: design.products }, () => newcomerNormal(sdInteraction));
      for (let s = design.newAssessorFromSession - 1; s < design.sessions; s++) {
        const assessorSession = newcomerNormal(sdAssessorSession);
        for (let p = 0; p < design.products; p++) {
          for (let r = 0; r < design.replicates; r++) {
            const value = 5 + productEffects[p] + level + newcomerInteraction[p] + sessionShifts[s] + assessorSession + productSessions[s][p] + newcomerNormal(sdResidual);
            rows.push({ session: `S${pad(s + 1)}`, assessor: `A${pad(design.assessors + 1)}`, product: String(101 + p * 17), replicate: r + 1, attribute, value: Math.round(value * 100) / 100 });
          }
        }
      }
    }
  }
  return design.missingness ? dropRatings(rows, { ...design.missingness, seed: design.seed + 2 }) : rows;
}

/** Session n is held on day 7(n − 1) from 2025-01-06: weekly, as the long form of import expects a date. */
function sessionDate(session: string): string {
  const day = new Date(Date.UTC(2025, 0, 6) + 7 * (Number(session.slice(1)) - 1) * 86_400_000);
  return day.toISOString().slice(0, 10);
}

function writeCsv(rows: Observation[], path: string): void {
  const lines = ['session,date,assessor,product,replicate,attribute,value'];
  for (const row of rows) lines.push(`${row.session},${sessionDate(row.session)},${row.assessor},${row.product},${row.replicate},${row.attribute},${row.value}`);
  writeFileSync(path, `${lines.join('\n')}\n`);
}

function readCsv(path: string): Observation[] {
  const lines = readFileSync(path, 'utf8').trim().split('\n');
  return lines.slice(1).map((line) => {
    const [session, , assessor, product, replicate, attribute, value] = line.split(',');
    return { session, assessor, product, replicate: Number(replicate), attribute, value: Number(value) };
  });
}

/** Worker mode: read the CSV, run one task, print {task, fits, fitMs}. */
function runTask(task: Task, csvPath: string): void {
  const rows = readCsv(csvPath);
  const cpuStart = process.cpuUsage();
  const start = performance.now();
  let fits = 0;
  if (task === 'session') {
    fitSessionModel(rows.filter((row) => row.session === 'S01' && row.attribute === 'attr01'));
    fits = 1;
  } else if (task === 'year') {
    const bySession = new Map<string, Map<string, Observation[]>>();
    for (const row of rows) {
      let byAttribute = bySession.get(row.session);
      if (!byAttribute) bySession.set(row.session, (byAttribute = new Map()));
      let group = byAttribute.get(row.attribute);
      if (!group) byAttribute.set(row.attribute, (group = []));
      group.push(row);
    }
    for (const byAttribute of bySession.values()) {
      for (const group of byAttribute.values()) {
        fitSessionModel(group);
        fits++;
      }
    }
  } else {
    const sessions = task === 'period12' ? 12 : 52;
    fitPeriodModel(rows.filter((row) => row.attribute === 'attr02' && Number(row.session.slice(1)) <= sessions));
    fits = 1;
  }
  const fitMs = performance.now() - start;
  const cpu = process.cpuUsage(cpuStart);
  const fitCpuMs = (cpu.user + cpu.system) / 1000;
  process.stdout.write(`${JSON.stringify({ task, fits, fitMs, fitCpuMs })}\n`);
}

interface Measurement {
  wallMs: number;
  fitMs: number;
  fitCpuMs: number;
}

function spawnTimed(command: string, args: string[]): { wallMs: number; stdout: string } {
  const start = performance.now();
  const child = spawnSync(command, args, { encoding: 'utf8', maxBuffer: 1 << 26 });
  const wallMs = performance.now() - start;
  if (child.status !== 0) throw new Error(`${command} failed: ${child.stderr.slice(0, 2000)}`);
  return { wallMs, stdout: child.stdout };
}

function measure(command: string, args: string[]): Measurement {
  const { wallMs, stdout } = spawnTimed(command, args);
  const report = JSON.parse(stdout.trim().split('\n').pop()!) as { fitMs: number; fitCpuMs: number };
  return { wallMs, fitMs: report.fitMs, fitCpuMs: report.fitCpuMs };
}

/** Wall time of the user-facing command on the year: compiled CLI (`bin/panel-steward` of `root`), JSON to /dev/null. */
function measureCli(root: string, csvPath: string): number {
  const start = performance.now();
  const child = spawnSync(process.execPath, [join(root, 'bin', 'panel-steward'), 'analyze', csvPath, '--format', 'json'], { stdio: ['ignore', 'ignore', 'pipe'], encoding: 'utf8' });
  const wallMs = performance.now() - start;
  if (child.status !== 0) throw new Error(`panel-steward analyze failed: ${child.stderr.slice(0, 2000)}`);
  return wallMs;
}

const loadAverage = (): string => loadavg()[0].toFixed(1);

function median(values: number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const middle = Math.floor(sorted.length / 2);
  return sorted.length % 2 ? sorted[middle] : (sorted[middle - 1] + sorted[middle]) / 2;
}

function main(): void {
  const argv = process.argv.slice(2);
  const option = (name: string): string | undefined => {
    const index = argv.indexOf(name);
    return index >= 0 ? argv[index + 1] : undefined;
  };
  const task = option('--task') as Task | undefined;
  if (task) {
    runTask(task, option('--csv')!);
    return;
  }
  const reps = Number(option('--reps') ?? 5);
  const rYearReps = Number(option('--r-year-reps') ?? 3);
  const skipR = argv.includes('--skip-r');
  // A build to compare the CLI with (a folder holding bin/ and dist/ of an earlier commit), run alternately with this one.
  const before = option('--before');
  const beforeLabel = option('--before-label') ?? 'before';
  if (!existsSync(COMPILED_ENTRY)) throw new Error('the CLI is not compiled: run `npm run build` first (the bench times dist/, as users run it)');
  const outDir = join(here, 'out');
  mkdirSync(outDir, { recursive: true });
  const datasets = (option('--data') ?? 'balanced,unbalanced').split(',');
  const self = fileURLToPath(import.meta.url);
  const rows: string[] = [];
  rows.push(
    '| data | task | panel-steward process (ms) | panel-steward fitting (ms) | panel-steward fitting CPU (ms) | lme4+lmerTest process (ms) | lme4+lmerTest fitting (ms) | lme4+lmerTest fitting CPU (ms) | ratio, process | ratio, fitting CPU | load (1 min) |',
  );
  rows.push('| --- | --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | --- |');
  const selected = option('--tasks')?.split(',') ?? [...TASKS];
  const format = (value: number): string => (Number.isNaN(value) ? '—' : value.toFixed(value < 10 ? 1 : 0));
  const ratio = (a: number, b: number): string => (Number.isNaN(b) || Number.isNaN(a) ? '—' : `${(b / a).toFixed(1)}×`);
  const emit = (row: string): void => {
    rows.push(row);
    process.stderr.write(`${row}\n`);
  };
  for (const data of datasets) {
    const design = data === 'unbalanced' ? UNBALANCED_YEAR_DESIGN : YEAR_DESIGN;
    const csvPath = join(outDir, data === 'unbalanced' ? 'fit-bench-year-unbalanced.csv' : 'fit-bench-year.csv');
    writeCsv(simulatePanel(design), csvPath);
    for (const name of TASKS.filter((t) => selected.includes(t))) {
      const loadAtStart = loadAverage();
      const ours = Array.from({ length: reps }, () => measure(process.execPath, ['--import', 'tsx', self, '--task', name, '--csv', csvPath]));
      const rReps = name === 'year' ? rYearReps : reps;
      const reference = skipR ? [] : Array.from({ length: rReps }, () => measure('Rscript', ['--vanilla', join(here, 'fit-bench.R'), name, csvPath]));
      const ourWall = median(ours.map((m) => m.wallMs));
      const ourFit = median(ours.map((m) => m.fitMs));
      const refWall = reference.length ? median(reference.map((m) => m.wallMs)) : Number.NaN;
      const refFit = reference.length ? median(reference.map((m) => m.fitMs)) : Number.NaN;
      const ourCpu = median(ours.map((m) => m.fitCpuMs));
      const refCpu = reference.length ? median(reference.map((m) => m.fitCpuMs)) : Number.NaN;
      emit(
        `| ${data} | ${name} | ${format(ourWall)} | ${format(ourFit)} | ${format(ourCpu)} | ${format(refWall)} | ${format(refFit)} | ${format(refCpu)} | ${ratio(ourWall, refWall)} | ${ratio(ourCpu, refCpu)} | ${loadAtStart}–${loadAverage()} |`,
      );
      if (name === 'year') {
        // The honest user-facing whole process: start-up, reading and checking the CSV, the
        // fits, the assessor index rows, JSON out; against the same lmerTest processes as above
        // (which fit only, read the CSV with read.csv and print nothing). With --before, the
        // earlier build runs alternately with this one, so both see the same machine load.
        const cliLoad = loadAverage();
        const cli: number[] = [];
        const cliBefore: number[] = [];
        for (let rep = 0; rep < reps; rep++) {
          cli.push(measureCli(join(here, '..'), csvPath));
          if (before) cliBefore.push(measureCli(before, csvPath));
        }
        const command = `\`panel-steward analyze YEAR.csv --format json\``;
        const load = `${cliLoad}–${loadAverage()}`;
        emit(`| ${data} | year, ${command}, this build | ${format(median(cli))} | — | — | ${format(refWall)} | — | — | ${ratio(median(cli), refWall)} | — | ${load} |`);
        if (before) emit(`| ${data} | year, ${command}, ${beforeLabel} | ${format(median(cliBefore))} | — | — | ${format(refWall)} | — | — | ${ratio(median(cliBefore), refWall)} | — | ${load} |`);
      }
    }
  }
  const table = rows.join('\n');
  writeFileSync(join(outDir, 'fit-bench.md'), `${table}\n`);
  process.stdout.write(`${table}\n`);
}

// Run only when executed, not when imported for its simulator.
if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) main();
