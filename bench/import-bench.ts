/**
 * Import throughput and peak memory of `importRatings` (reader + store, end to end) for long
 * and wide CSV files of 10⁵ and 10⁶ ratings. Each run is a fresh process on a fresh store, so
 * peak RSS is that of one import. Prints a Markdown table for bench/README.md ("## Import (store)").
 * `--compare DIR [--compare-label TEXT]` also runs each import with the project copy in DIR (an older commit with this
 * script copied into its bench/), alternating with this one, so both see the same machine load.
 * `--built` runs the compiled code in each tree's dist/ (build it first: `npm run build`), which is
 * what `panel-steward import` and the service run; without it, the .ts sources through tsx.
 * `--reader auto|worker|in-thread` chooses where this commit reads the file (ImportRequest.reader).
 * "process s" is the whole child process (start-up, import, closing the store) as the parent saw it.
 *
 *   npx tsx bench/import-bench.ts [--runs 3] [--sizes 100000,1000000] [--forms long,wide] [--compare DIR] [--built]
 */
import { spawnSync } from 'node:child_process';
import { createWriteStream, existsSync, mkdirSync, rmSync } from 'node:fs';
import { once } from 'node:events';
import { cpus, loadavg, tmpdir } from 'node:os';
import { basename, join } from 'node:path';
import { fileInput, importRatings } from '../store/import-ratings.js';
import { openStore } from '../store/open-store.js';
import { designForRatings, nRatingsOf, syntheticWideLines, writeSyntheticLongCsv, type SyntheticDesign } from '../test/store/synthetic-ratings.js';

interface RunResult {
  ratings: number;
  totalMs: number;
  /** CPU time of the process during the import (user + system): less sensitive to a busy machine. */
  cpuMs: number;
  readMs: number;
  writeMs: number;
  /** CPU time of the write transaction. */
  writeCpuMs: number;
  maxRssMb: number;
  outcome: string;
  /** The whole child process as the parent saw it: start-up, import, closing the store. */
  processMs?: number;
}

async function writeSyntheticWideCsv(path: string, design: SyntheticDesign): Promise<void> {
  const out = createWriteStream(path);
  let buffer: string[] = [];
  for (const line of syntheticWideLines(design)) {
    buffer.push(line);
    if (buffer.length >= 2000) {
      if (!out.write(`${buffer.join('\n')}\n`)) await once(out, 'drain');
      buffer = [];
    }
  }
  out.end(`${buffer.join('\n')}\n`);
  await once(out, 'finish');
}

async function child(store: string, file: string, built: boolean, reader: 'auto' | 'worker' | 'in-thread'): Promise<void> {
  // --built: the compiled code in this tree's dist/ (what `panel-steward import` runs), else the .ts sources.
  const root = join(import.meta.dirname, '..');
  const modules = built
    ? {
        importRatings: ((await import(join(root, 'dist', 'store', 'import-ratings.js'))) as typeof import('../store/import-ratings.js')).importRatings,
        openStore: ((await import(join(root, 'dist', 'store', 'open-store.js'))) as typeof import('../store/open-store.js')).openStore,
      }
    : { importRatings, openStore };
  const db = modules.openStore(store);
  const start = performance.now();
  const cpuStart = process.cpuUsage();
  let writingAt = 0;
  let committedAt = 0;
  let writingCpu = process.cpuUsage();
  let writeCpuMs = 0;
  const report = await modules.importRatings(db, {
    panel: 'bench',
    fileName: basename(file),
    source: 'cli',
    input: fileInput(file),
    scale: { min: 0, max: 10 },
    quarantine: false,
    reader,
    onPhase: (phase) => {
      if (phase === 'writing') {
        writingAt = performance.now();
        writingCpu = process.cpuUsage();
      } else {
        committedAt = performance.now();
        const cpu = process.cpuUsage(writingCpu);
        writeCpuMs = (cpu.user + cpu.system) / 1000;
      }
    },
  });
  const end = performance.now();
  const cpu = process.cpuUsage(cpuStart);
  db.close();
  const result: RunResult = {
    ratings: report.counts.ratings,
    totalMs: end - start,
    cpuMs: (cpu.user + cpu.system) / 1000,
    readMs: writingAt - start,
    writeMs: committedAt - writingAt,
    writeCpuMs,
    maxRssMb: process.resourceUsage().maxRSS / 1024,
    outcome: report.outcome,
  };
  process.stdout.write(`${JSON.stringify(result)}\n`);
}

const median = (xs: number[]): number => {
  const s = [...xs].sort((a, b) => a - b);
  return s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};

async function main(): Promise<void> {
  const args = process.argv.slice(2);
  if (args[0] === '--child') return child(args[1], args[2], args[3] === '--built', (args[4] ?? 'auto') as 'auto' | 'worker' | 'in-thread');
  const option = (name: string, fallback: string): string => {
    const at = args.indexOf(name);
    return at >= 0 ? args[at + 1] : fallback;
  };
  const runs = Number(option('--runs', '3'));
  const sizes = option('--sizes', '100000,1000000').split(',').map(Number);
  const forms = option('--forms', 'long,wide').split(',') as ('long' | 'wide')[];
  const compare = option('--compare', '');
  const built = args.includes('--built');
  const reader = option('--reader', 'auto');
  const trees: { label: string; script: string }[] = [{ label: 'this commit', script: import.meta.filename }];
  if (compare !== '') trees.unshift({ label: option('--compare-label', 'before'), script: join(compare, 'bench', 'import-bench.ts') });
  const loadAtStart = loadavg()[0].toFixed(1);
  const folder = join(tmpdir(), 'panel-steward-import-bench');
  mkdirSync(folder, { recursive: true });
  const rows: string[] = [];
  for (const size of sizes) {
    for (const form of forms) {
      const design = designForRatings(size, 42);
      const file = join(folder, `${form}-${nRatingsOf(design)}.csv`);
      if (!existsSync(file)) {
        if (form === 'long') await writeSyntheticLongCsv(file, design);
        else await writeSyntheticWideCsv(file, design);
      }
      const results: RunResult[][] = trees.map(() => []);
      for (let run = 0; run < runs; run++) {
        trees.forEach((tree, t) => {
          const store = join(folder, `store-${size}-${run}.db`);
          for (const suffix of ['', '-wal', '-shm']) rmSync(store + suffix, { force: true });
          const childArgs = ['--import', 'tsx', tree.script, '--child', store, file, built ? '--built' : '--sources', reader];
          const spawnedAt = performance.now();
          const out = spawnSync(process.execPath, childArgs, { encoding: 'utf8', maxBuffer: 1 << 20, cwd: join(tree.script, '..', '..') });
          const processMs = performance.now() - spawnedAt;
          if (out.status !== 0) throw new Error(out.stderr);
          results[t].push({ ...(JSON.parse(out.stdout.trim().split('\n').at(-1)!) as RunResult), processMs });
          for (const suffix of ['', '-wal', '-shm']) rmSync(store + suffix, { force: true });
        });
      }
      trees.forEach((tree, t) => {
        const treeResults = results[t];
        const ratings = treeResults[0].ratings;
        if (treeResults.some((r) => r.outcome !== 'imported')) throw new Error(`an import did not import: ${JSON.stringify(treeResults)}`);
        const totalMs = median(treeResults.map((r) => r.totalMs));
        const cpuMs = median(treeResults.map((r) => r.cpuMs));
        const perSecond = (ms: number): string => Math.round((ratings / ms) * 1000).toLocaleString('en-US');
        rows.push(
          `| ${ratings.toLocaleString('en-US')} | ${form} | ${tree.label} | ${(totalMs / 1000).toFixed(2)} | ${perSecond(totalMs)} | ${(cpuMs / 1000).toFixed(2)} | ${perSecond(cpuMs)} | ` +
            `${(median(treeResults.map((r) => r.processMs ?? NaN)) / 1000).toFixed(2)} | ` +
            `${(median(treeResults.map((r) => r.readMs)) / 1000).toFixed(2)} | ${(median(treeResults.map((r) => r.writeMs)) / 1000).toFixed(2)} | ${(median(treeResults.map((r) => r.writeCpuMs)) / 1000).toFixed(2)} | ${Math.round(median(treeResults.map((r) => r.maxRssMb)))} |`,
        );
      });
    }
  }
  const load = loadavg()[0].toFixed(1);
  process.stdout.write(
    [
      `${cpus().length} cores (${cpus()[0]?.model ?? 'unknown'}), Node ${process.version}, load average ${loadAtStart} at the start and ${load} at the end; ${built ? 'compiled dist/' : '.ts sources through tsx'}; reader ${reader}; medians of ${runs} runs.`,
      '',
      '| ratings | form | code | wall s | ratings/s (wall) | CPU s | ratings/s (CPU) | process s | read + stage s | write transaction s | write CPU s | peak RSS MB |',
      '| ---: | --- | --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: |',
      ...rows,
      '',
    ].join('\n'),
  );
}

await main();
