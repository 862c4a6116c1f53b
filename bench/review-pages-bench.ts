/**
 * Server time per page type on a year of data (52 sessions, 12 assessors, 10 attributes;
 * test/monitor/review-year.ts), through fastify inject (no network, no browser): the first
 * request of each page in a fresh app (cold: templates, the panel history read from the store)
 * and the median of 7 requests after it (warm). Goal: every page under 300 ms.
 * Run: `npx tsx bench/review-pages-bench.ts [store.db]` — with a store file from an earlier run
 * the import and refit are skipped (the file is created when missing).
 */
import { existsSync } from 'node:fs';
import { buildApp } from '../server/app.js';
import { createFitPool } from '../server/fit-pool.js';
import { refitPanel } from '../server/refit.js';
import { listFlags } from '../store/monitor-flags.js';
import { openStore } from '../store/open-store.js';
import { findPanel } from '../store/fits-sessions.js';
import { importYear, reviewYear } from '../test/monitor/review-year.js';

// --after-refit: the service's refit (nothing stale, so it only prepares the pages) runs before
// the first request, as after an import; the cold column is then a panel leader's first visit.
const afterRefit = process.argv.includes('--after-refit');
const path = process.argv.slice(2).find((a) => !a.startsWith('--')) ?? 'bench/out/review-year.db';
const isNew = !existsSync(path);
const db = openStore(path);
const panel = reviewYear();
if (isNew) {
  await importYear(db, panel);
  const runner = createFitPool();
  await refitPanel(db, panel.panelName, { runner });
  await runner.close();
}
const panelId = findPanel(db, panel.panelName)!.id;
const actCase = listFlags(db, panelId, { severity: 'act' }).find((r) => r.flag.assessor !== null)!;
const app = await buildApp({ db });
if (afterRefit) {
  app.refitService.schedule(panel.panelName, 'bench');
  await app.refitService.whenIdle();
}
const p = `/panels/${encodeURIComponent(panel.panelName)}`;
const m = `${p}/monitor`;
const pages: [string, string][] = [
  ['review (landing page)', `${m}/review`],
  ['case (evidence and chart)', `${m}/cases/${actCase.id}`],
  ['monitor overview', m],
  ['assessor', `${m}/assessors/A10`],
  ['flags', `${m}/flags`],
  ['retraining', `${m}/retraining`],
  ['events', `${m}/events`],
  ['products', `${m}/products`],
  ['control product', `${m}/control`],
  ['settings', `${m}/settings`],
  ['panel', p],
];
const repeat = async (n: number, f: () => Promise<number>): Promise<number[]> => {
  const out: number[] = [];
  for (let i = 0; i < n; i++) out.push(await f());
  return out;
};
const median = (v: number[]) => [...v].sort((a, b) => a - b)[v.length >> 1];
const time = async (url: string): Promise<number> => {
  const start = performance.now();
  const response = await app.inject({ url });
  if (response.statusCode !== 200) throw new Error(`${url}: ${response.statusCode}`);
  return performance.now() - start;
};
console.log('| page (52 sessions × 12 assessors × 10 attributes) | cold ms | warm ms, median of 7 | JSON twin ms, median of 3 | goal < 300 ms |');
console.log('| --- | --- | --- | --- | --- |');
for (const [name, url] of pages) {
  const cold = await time(url);
  const warm = median(await repeat(7, () => time(url)));
  const twin = median(await repeat(3, () => time(`${url}.json`)));
  console.log(`| ${name} | ${cold.toFixed(0)} | ${warm.toFixed(0)} | ${twin.toFixed(0)} | ${warm < 300 ? 'met' : 'not met'} |`);
}
console.log(`\nNode ${process.version}; ${isNew ? 'store built in this run' : `store ${path}`}${afterRefit ? '; first requests after the service refit prepared the pages' : ''}.`);
await app.close();
db.close();
