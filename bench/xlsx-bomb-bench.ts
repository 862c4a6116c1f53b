/**
 * Time and peak memory of reading a decompression bomb: a .xlsx of about 0.7 MB whose one cell
 * unzips to 700 MB (test/ingest/xlsx-bomb.ts). Each reading is a fresh process (peak RSS is
 * that process's `maxRSS`), through `readRatings` as an import reads a file; the time runs
 * from the first read to the answer, with exceljs already loaded. `--before DIR`
 * also reads it with the project copy in DIR (an older commit, e.g. from `git archive`, with
 * node_modules linked), alternating with this one so both see the same machine load.
 *
 *   npx tsx bench/xlsx-bomb-bench.ts [--runs 3] [--cell-mb 700] [--before DIR]
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { writeXlsxBomb } from '../test/ingest/xlsx-bomb.js';

const args = process.argv.slice(2);
const option = (name: string): string | undefined => (args.includes(name) ? args[args.indexOf(name) + 1] : undefined);
const runs = Number(option('--runs') ?? 3);
const cellMb = Number(option('--cell-mb') ?? 700);
const before = option('--before');
const here = resolve(import.meta.dirname, '..');

const folder = mkdtempSync(join(tmpdir(), 'ps-bomb-bench-'));
const child = join(folder, 'read-one.mts');
writeFileSync(
  child,
  `const [root, file] = process.argv.slice(2);
const { readRatings } = await import(root + '/ingest/read-ratings.ts');
// exceljs is loaded on first use; loaded here so the time is the reading's own.
const { createRequire } = await import('node:module');
await import(createRequire(root + '/package.json').resolve('exceljs'));
const rssBeforeMb = process.memoryUsage().rss / 1048576;
const started = performance.now();
const problems = [];
let ratings = 0;
for await (const event of readRatings({ path: file }, { fileName: 'bomb.xlsx', scaleFor: () => ({ min: 0, max: 10 }) })) {
  if (event.type === 'problem') problems.push(event.problem.message);
  if (event.type === 'rating') ratings += 1;
}
const ms = performance.now() - started;
console.log(JSON.stringify({ ms, rssBeforeMb, maxRssMb: process.resourceUsage().maxRSS / 1024, ratings, problem: problems[0] ?? null }));
`,
);

interface Reading {
  ms: number;
  rssBeforeMb: number;
  maxRssMb: number;
  problem: string | null;
}

function readWith(root: string, file: string): Reading {
  const result = spawnSync(process.execPath, ['--import', 'tsx', child, root, file], { cwd: root, encoding: 'utf8', maxBuffer: 1 << 24 });
  const line = result.stdout.trim().split('\n').pop() ?? '';
  try {
    return JSON.parse(line) as Reading;
  } catch {
    return { ms: NaN, rssBeforeMb: NaN, maxRssMb: NaN, problem: `process failed (exit ${result.status}): ${result.stderr.slice(-300)}` };
  }
}

const median = (xs: number[]): number => {
  const s = [...xs].sort((a, b) => a - b);
  return s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};

try {
  const file = join(folder, 'bomb.xlsx');
  const { fileBytes, sheetBytes } = await writeXlsxBomb(file, cellMb * 1024 * 1024);
  const trees: [string, string][] = [['this commit', here], ...(before ? [['before', resolve(before)] as [string, string]] : [])];
  const readings = new Map<string, Reading[]>(trees.map(([label]) => [label, []]));
  for (let i = 0; i < runs; i++) for (const [label, root] of trees) readings.get(label)!.push(readWith(root, file));
  console.log(`file ${(fileBytes / 1e6).toFixed(2)} MB, sheet unzips to ${(sheetBytes / (1024 * 1024)).toFixed(0)} MB; ${runs} readings each, alternating; medians\n`);
  console.log('| code | reading s (exceljs loaded) | RSS before reading MB | peak RSS MB | message |');
  console.log('| --- | --- | --- | --- | --- |');
  for (const [label] of trees) {
    const rs = readings.get(label)!;
    console.log(
      `| ${label} | ${(median(rs.map((r) => r.ms)) / 1000).toFixed(2)} | ${median(rs.map((r) => r.rssBeforeMb)).toFixed(0)} | ${median(rs.map((r) => r.maxRssMb)).toFixed(0)} | ${rs[0].problem ?? '(none)'} |`,
    );
  }
} finally {
  rmSync(folder, { recursive: true, force: true });
}
