/**
 * Cost of checking the store when it opens. `openStore` runs `PRAGMA quick_check` before
 * anything writes; `panel-steward check` runs the full `integrity_check`. Measured on a
 * year-size store (52 weekly sessions × 12 assessors × 6 products × 2 replicates × 10
 * attributes = 74,880 ratings, then a full refit so the fits, indices, period fits and flags
 * are stored too) and on a 10⁶-rating store (ratings only). Medians of `--runs` (default 7),
 * file cache warm (the store was just written), as at every start after the first.
 *
 *   npx tsx bench/store-check-bench.ts [--runs 7] [--skip-large]
 */
import { mkdtempSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import { createFitPool } from '../server/fit-pool.js';
import { refitPanel } from '../server/refit.js';
import { fileInput, importRatings } from '../store/import-ratings.js';
import { openStore } from '../store/open-store.js';
import { writeSyntheticLongCsv, type SyntheticDesign } from '../test/store/synthetic-ratings.js';

const args = process.argv.slice(2);
const runs = Number(args[args.indexOf('--runs') + 1]) || 7;
const skipLarge = args.includes('--skip-large');

const median = (xs: number[]): number => {
  const s = [...xs].sort((a, b) => a - b);
  return s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};

function timed(f: () => void): number {
  const t0 = performance.now();
  f();
  return performance.now() - t0;
}

async function buildStore(folder: string, name: string, design: SyntheticDesign, refit: boolean): Promise<string> {
  const path = join(folder, `${name}.db`);
  const csv = join(folder, `${name}.csv`);
  await writeSyntheticLongCsv(csv, design);
  const db = openStore(path);
  const report = await importRatings(db, { panel: 'bench', fileName: `${name}.csv`, source: 'cli', input: fileInput(csv), scale: { min: 0, max: 10 }, quarantine: false });
  if (!report.ok) throw new Error(report.message);
  if (refit) {
    const runner = createFitPool();
    try {
      await refitPanel(db, 'bench', { runner });
    } finally {
      await runner.close();
    }
  }
  db.pragma('wal_checkpoint(TRUNCATE)');
  db.close();
  rmSync(csv);
  return path;
}

function measure(label: string, path: string, nRatings: number): string {
  const bare: number[] = [];
  const opened: number[] = [];
  const quick: number[] = [];
  const integrity: number[] = [];
  for (let i = 0; i < runs; i++) {
    // Open + pragmas + migrations check, without and with quick_check (openStore).
    bare.push(
      timed(() => {
        const db = new BetterSqlite3(path);
        db.pragma('journal_mode = WAL');
        db.prepare('SELECT count(*) FROM schema_migrations').get();
        db.close();
      }),
    );
    opened.push(timed(() => openStore(path).close()));
    const db = new BetterSqlite3(path);
    quick.push(timed(() => db.pragma('quick_check')));
    integrity.push(timed(() => db.pragma('integrity_check')));
    db.close();
  }
  const mb = statSync(path).size / (1024 * 1024);
  const f = (ms: number) => ms.toFixed(ms < 10 ? 1 : 0);
  return `| ${label} | ${nRatings.toLocaleString('en-US')} | ${mb.toFixed(1)} | ${f(median(quick))} | ${f(median(integrity))} | ${f(median(bare))} | ${f(median(opened))} |`;
}

const folder = mkdtempSync(join(tmpdir(), 'ps-check-bench-'));
try {
  const rows: string[] = [];
  const year: SyntheticDesign = { sessions: 52, assessors: 12, products: 6, replicates: 2, attributes: 10, seed: 3 };
  const yearPath = await buildStore(folder, 'year', year, true);
  rows.push(measure('year, with fits', yearPath, 74_880));
  if (!skipLarge) {
    const large: SyntheticDesign = { sessions: 695, assessors: 12, products: 6, replicates: 2, attributes: 10, seed: 4 };
    const largePath = await buildStore(folder, 'large', large, false);
    rows.push(measure('10⁶ ratings, no fits', largePath, 695 * 1440));
  }
  console.log(`runs: ${runs} (medians, ms)\n`);
  console.log('| store | ratings | file MB | quick_check ms | integrity_check ms | open without check ms | openStore (with quick_check) ms |');
  console.log('| --- | --- | --- | --- | --- | --- | --- |');
  for (const row of rows) console.log(row);
} finally {
  rmSync(folder, { recursive: true, force: true });
}
