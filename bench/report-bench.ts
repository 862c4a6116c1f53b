/**
 * Report pages benchmark: server time of each new page on a year of data (52 sessions,
 * 12 assessors, 10 attributes, refitted; test/reports/year-store.ts) through fastify inject.
 * The first request per page (parses the stored JSON; later ones reuse it until a refit), then
 * the median, min and max wall time of N requests and the median CPU time of this process (the
 * CPU column does not stretch when other jobs share the cores). Goal < 300 ms.
 *
 *   npx tsx bench/report-bench.ts [--runs N]
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { buildApp } from '../server/app.js';
import { openStore } from '../store/open-store.js';
import { yearPanel, yearStorePath } from '../test/reports/year-store.js';

const runsArg = process.argv.indexOf('--runs');
const runs = runsArg > 0 ? Number(process.argv[runsArg + 1]) : 15;
const dir = mkdtempSync(join(tmpdir(), 'report-bench-'));
const db = openStore(await yearStorePath(join(dir, 'year.db')));
const app = await buildApp({ db });
const p = encodeURIComponent(yearPanel().panelName);

const pages: [string, string][] = [
  ['session report (S30)', `/panels/${p}/sessions/S30/report`],
  ['session report JSON twin', `/panels/${p}/sessions/S30/report.json`],
  ['session report CSV (indices)', `/panels/${p}/sessions/S30/report.csv?table=indices`],
  ['range report, latest 12 sessions', `/panels/${p}/report`],
  ['range report, whole year (52)', `/panels/${p}/report?from=S01&to=S52`],
  ['feedback sheet, one session', `/panels/${p}/assessors/A03/feedback?session=S30`],
  ['feedback sheet, whole year', `/panels/${p}/assessors/A03/feedback?from=S01&to=S52`],
];

const median = (v: number[]) => [...v].sort((a, b) => a - b)[v.length >> 1];
console.log(`node ${process.version}, ${cpus().length} cores, load ${loadavg().map((l) => l.toFixed(1)).join(' ')}, ${runs} runs per page`);
console.log('| page | first request ms | median ms | min | max | median CPU ms | bytes |');
console.log('| --- | ---: | ---: | ---: | ---: | ---: | ---: |');
for (const [name, url] of pages) {
  const t0 = performance.now();
  const first = await app.inject({ url });
  const firstMs = performance.now() - t0;
  if (first.statusCode !== 200) throw new Error(`${url}: ${first.statusCode}`);
  const times: number[] = [];
  const cpuTimes: number[] = [];
  for (let i = 0; i < runs; i++) {
    const t0 = performance.now();
    const c0 = process.cpuUsage();
    await app.inject({ url });
    const cpu = process.cpuUsage(c0);
    cpuTimes.push((cpu.user + cpu.system) / 1000);
    times.push(performance.now() - t0);
  }
  console.log(`| ${name} | ${firstMs.toFixed(0)} | ${median(times).toFixed(0)} | ${Math.min(...times).toFixed(0)} | ${Math.max(...times).toFixed(0)} | ${median(cpuTimes).toFixed(0)} | ${first.body.length.toLocaleString('en-US')} |`);
}
await app.close();
db.close();
rmSync(dir, { recursive: true, force: true });
