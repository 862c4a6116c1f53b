/**
 * Parsing benchmark (ingest only, no database): throughput and peak memory of readRatings
 * for 1e5 and 1e6 ratings in long and wide form, each read in a fresh child process so that
 * its peak RSS is its own; medians of --runs runs. Also times bare csv-parse and bare
 * papaparse on the same long file. `--compare DIR` also reads each file with the project copy
 * in DIR (an older commit with this script copied into its bench/), alternating with this one.
 *
 *   npx tsx bench/ingest-bench.ts [--runs 3] [--sizes 100000,1000000] [--forms long,wide,wide-xlsx] [--compare DIR --compare-label TEXT]
 */
import { spawnSync } from 'node:child_process';
import { createReadStream, createWriteStream, mkdtempSync, rmSync, statSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parse } from 'csv-parse';
import Papa from 'papaparse';
import ExcelJS from 'exceljs';
import { readRatings } from '../ingest/read-ratings.js';

const ATTRIBUTES = ['crunchy', 'salty', 'sweet', 'sour', 'bitter', 'oily', 'hard', 'moist', 'roasted', 'smoky'];
const ASSESSORS = 12;
const PRODUCTS = 6;
const REPLICATES = 2;

/** Write nRatings invented ratings (a panel year: sessions × assessors × products × reps × attributes). */
async function writeFile(path: string, form: 'long' | 'wide', nRatings: number): Promise<void> {
  const out = createWriteStream(path);
  const write = (s: string): Promise<void> | void => {
    if (!out.write(s)) return new Promise((resolve) => out.once('drain', () => resolve()));
  };
  await write(
    form === 'long'
      ? 'session,date,assessor,product,replicate,attribute,value\n'
      : `session,date,assessor,product,replicate,${ATTRIBUTES.join(',')}\n`,
  );
  const perSession = ASSESSORS * PRODUCTS * REPLICATES * ATTRIBUTES.length;
  let written = 0;
  let buffer = '';
  for (let session = 0; written < nRatings; session++) {
    const day = new Date(Date.UTC(2020, 0, 6) + session * 7 * 86_400_000).toISOString().slice(0, 10);
    for (let k = 0; k < perSession / ATTRIBUTES.length && written < nRatings; k++) {
      const assessor = `A${(k % ASSESSORS) + 1}`;
      const product = `P${(Math.floor(k / ASSESSORS) % PRODUCTS) + 1}`;
      const replicate = Math.floor(k / (ASSESSORS * PRODUCTS)) + 1;
      const key = `W${session + 1},${day},${assessor},${product},${replicate}`;
      if (form === 'long') {
        for (let a = 0; a < ATTRIBUTES.length && written < nRatings; a++, written++) {
          buffer += `${key},${ATTRIBUTES[a]},${((written * 7919) % 101) / 10}\n`;
        }
      } else {
        const values = ATTRIBUTES.map((_, a) => ((written + a) * 7919 % 101) / 10);
        written += ATTRIBUTES.length;
        buffer += `${key},${values.join(',')}\n`;
      }
      if (buffer.length > 1 << 16) {
        await write(buffer);
        buffer = '';
      }
    }
  }
  await write(buffer);
  await new Promise<void>((resolve, reject) => out.end((error?: Error | null) => (error ? reject(error) : resolve())));
}

/** The wide CSV as an .xlsx workbook (exceljs streaming writer; numbers as numbers, dates as dates). */
async function writeXlsx(csvPath: string, xlsxPath: string): Promise<void> {
  const workbook = new ExcelJS.stream.xlsx.WorkbookWriter({ filename: xlsxPath, useSharedStrings: true });
  const sheet = workbook.addWorksheet('Ratings');
  let header = true;
  for await (const record of createReadStream(csvPath).pipe(parse())) {
    const cells = record as string[];
    if (header) {
      sheet.addRow(cells).commit();
      header = false;
      continue;
    }
    const [y, m, d] = cells[1].split('-').map(Number);
    const row = sheet.addRow([cells[0], new Date(Date.UTC(y, m - 1, d)), cells[2], cells[3], Number(cells[4]), ...cells.slice(5).map(Number)]);
    row.getCell(2).numFmt = 'yyyy-mm-dd';
    row.commit();
  }
  await workbook.commit();
}

interface ChildResult {
  nRatings: number;
  nProblems: number;
  seconds: number;
  /** CPU time of the read (user + system): less sensitive than wall time to other load on the machine. */
  cpuSeconds: number;
  /** RSS after start-up and imports, before reading: the baseline the peak is compared with. */
  baselineRssMb: number;
  peakRssMb: number;
}

/** Runs inside the child: read the file, report counts, time and peak RSS. */
async function child(mode: string, path: string): Promise<void> {
  const baselineRssMb = process.memoryUsage().rss / 2 ** 20;
  const cpuStart = process.cpuUsage();
  const start = process.hrtime.bigint();
  let nRatings = 0;
  let nProblems = 0;
  if (mode === 'csv-parse') {
    const parser = createReadStream(path).pipe(parse({ relax_column_count: true }));
    for await (const _record of parser) nRatings++;
    nRatings--; // header
  } else if (mode === 'papaparse') {
    const parser = new Papa.Parser({ delimiter: ',', newline: '\n' });
    let pending = '';
    for await (const chunk of createReadStream(path, { encoding: 'utf8', highWaterMark: 1 << 16 })) {
      const input = pending + (chunk as string);
      const result = parser.parse(input, 0, true);
      nRatings += result.data.length;
      pending = input.slice(result.meta.cursor);
    }
    if (pending !== '') nRatings += parser.parse(pending, 0, false).data.length;
    nRatings--; // header
  } else {
    for await (const event of readRatings({ path }, { fileName: path.endsWith('.xlsx') ? 'bench.xlsx' : 'bench.csv', scaleFor: () => ({ min: 0, max: 10 }) })) {
      if (event.type === 'rating') nRatings++;
      else if (event.type === 'problem') nProblems++;
    }
  }
  const seconds = Number(process.hrtime.bigint() - start) / 1e9;
  const cpu = process.cpuUsage(cpuStart);
  const cpuSeconds = (cpu.user + cpu.system) / 1e6;
  // maxRSS is in kilobytes.
  const result: ChildResult = { nRatings, nProblems, seconds, cpuSeconds, baselineRssMb, peakRssMb: process.resourceUsage().maxRSS / 1024 };
  process.stdout.write(JSON.stringify(result));
}

function runChild(script: string, mode: string, path: string): ChildResult {
  const run = spawnSync(process.execPath, ['--import', 'tsx', script, '--child', mode, path], { encoding: 'utf8', maxBuffer: 1 << 20, cwd: join(script, '..', '..') });
  if (run.status !== 0) throw new Error(`child failed: ${run.stderr}`);
  return JSON.parse(run.stdout) as ChildResult;
}

const median = (xs: number[]): number => {
  const s = [...xs].sort((a, b) => a - b);
  return s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};

async function main(): Promise<void> {
  const args = process.argv.slice(2);
  const option = (name: string, fallback: string): string => {
    const at = args.indexOf(name);
    return at >= 0 ? args[at + 1] : fallback;
  };
  const runs = Number(option('--runs', '3'));
  const sizes = option('--sizes', '100000,1000000').split(',').map(Number);
  const forms = option('--forms', 'long,wide,wide-xlsx').split(',') as ('long' | 'wide' | 'wide-xlsx')[];
  const compare = option('--compare', '');
  const self = fileURLToPath(import.meta.url);
  const dir = mkdtempSync(join(tmpdir(), 'ingest-bench-'));
  const rows: string[] = [];
  try {
    for (const n of sizes) {
      for (const form of forms) {
        const path = join(dir, form === 'wide-xlsx' ? `wide-${n}.xlsx` : `${form}-${n}.csv`);
        if (form === 'wide-xlsx') {
          const csvPath = join(dir, `wide-${n}.csv`);
          await writeFile(csvPath, 'wide', n);
          await writeXlsx(csvPath, path);
        } else {
          await writeFile(path, form, n);
        }
        const sizeMb = statSync(path).size / 1e6;
        const readers: { label: string; script: string; mode: string }[] = [];
        if (compare !== '') readers.push({ label: `readRatings, ${option('--compare-label', 'before')}`, script: join(compare, 'bench', 'ingest-bench.ts'), mode: 'readRatings' });
        readers.push({ label: compare === '' ? 'readRatings' : 'readRatings, this commit', script: self, mode: 'readRatings' });
        if (form === 'long') {
          readers.push({ label: 'bare csv-parse (records)', script: self, mode: 'csv-parse' });
          readers.push({ label: 'bare papaparse (records)', script: self, mode: 'papaparse' });
        }
        const results: ChildResult[][] = readers.map(() => []);
        for (let run = 0; run < runs; run++) {
          readers.forEach((reader, i) => {
            const r = runChild(reader.script, reader.mode, path);
            if (r.nRatings !== n || r.nProblems !== 0) throw new Error(`${reader.label}: expected ${n} ratings, got ${r.nRatings} (${r.nProblems} problems)`);
            results[i].push(r);
          });
        }
        readers.forEach((reader, i) => {
          const seconds = median(results[i].map((r) => r.seconds));
          const cpuSeconds = median(results[i].map((r) => r.cpuSeconds));
          const rate = (s: number): string => Math.round(n / s).toLocaleString('en-US');
          rows.push(
            `| ${n.toExponential(0).replace('e+', 'e')} | ${form} | ${reader.label} | ${sizeMb.toFixed(1)} | ${seconds.toFixed(2)} | ${rate(seconds)} | ${cpuSeconds.toFixed(2)} | ${rate(cpuSeconds)} | ${median(results[i].map((r) => r.baselineRssMb)).toFixed(0)} | ${median(results[i].map((r) => r.peakRssMb)).toFixed(0)} |`,
          );
        });
      }
    }
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
  console.log(`Node ${process.version}, ${cpus().length} × ${cpus()[0]?.model ?? 'cpu'}, load average at end ${loadavg()[0].toFixed(1)}; medians of ${runs} runs`);
  console.log('| ratings | form | reader | file MB | wall s | ratings/s (wall) | CPU s | ratings/CPU-s | RSS before MB | peak RSS MB |');
  console.log('| ---: | --- | --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: |');
  for (const row of rows) console.log(row);
}

if (process.argv[2] === '--child') await child(process.argv[3], process.argv[4]);
else await main();
