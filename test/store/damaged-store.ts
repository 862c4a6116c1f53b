/**
 * A store damaged the way a disk fault or a stray write damages one: bytes in the middle of the
 * file overwritten. The page chosen is a leaf of the rating table's b-tree in the middle of the
 * file, so SQLite's quick_check (which walks every b-tree page) notices it.
 */
import { closeSync, openSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import { fileInput, importRatings } from '../../store/import-ratings.js';
import { openStore } from '../../store/open-store.js';
import { writeSyntheticLongCsv } from './synthetic-ratings.js';

export interface DamagedStore {
  path: string;
  /** The 1-based page overwritten and its byte offset in the file. */
  page: number;
  offset: number;
  fileSize: number;
}

/** Imports 4 sessions of invented ratings into `folder/name`, then overwrites one rating-table page. */
export async function makeDamagedStore(folder: string, name = 'damaged.db'): Promise<DamagedStore> {
  const path = join(folder, name);
  const csv = join(folder, `${name}.csv`);
  await writeSyntheticLongCsv(csv, { sessions: 4, assessors: 12, products: 6, replicates: 2, attributes: 10, seed: 5 });
  const db = openStore(path);
  const report = await importRatings(db, { panel: 'crisps', fileName: 'base.csv', source: 'cli', input: fileInput(csv), scale: { min: 0, max: 10 }, quarantine: false });
  if (!report.ok) throw new Error(report.message);
  db.close();

  const raw = new BetterSqlite3(path);
  // Everything into the main file, so the overwrite is not hidden behind the write-ahead log.
  raw.pragma('wal_checkpoint(TRUNCATE)');
  const pageSize = raw.pragma('page_size', { simple: true }) as number;
  const pageCount = raw.pragma('page_count', { simple: true }) as number;
  const leaves = (raw.prepare("SELECT pageno FROM dbstat WHERE name = 'rating' AND pagetype = 'leaf' ORDER BY pageno").all() as { pageno: number }[]).map((r) => r.pageno);
  raw.close();
  // The leaf nearest the middle of the file.
  const page = leaves.reduce((best, p) => (Math.abs(p - pageCount / 2) < Math.abs(best - pageCount / 2) ? p : best), leaves[0]);
  const offset = (page - 1) * pageSize;
  // Seeded junk over the page header, the cell pointers and the first cells.
  const junk = Buffer.alloc(1024);
  let state = 12345;
  for (let i = 0; i < junk.length; i++) {
    state = (state * 48271) % 2147483647;
    junk[i] = state & 0xff;
  }
  const fd = openSync(path, 'r+');
  writeSync(fd, junk, 0, junk.length, offset + 8);
  closeSync(fd);
  return { path, page, offset, fileSize: pageCount * pageSize };
}
