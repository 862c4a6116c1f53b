/**
 * Reading on a worker thread (ingest/read-in-worker.ts) against reading on the calling thread:
 * the same stores and reports, and no partial write when the worker fails.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { CompactEncoder, F_CODE, F_SESSION, KEY_FIELDS } from '../../ingest/compact-batches.js';
import { readInWorker } from '../../ingest/read-in-worker.js';
import type { ReadEvent } from '../../ingest/read-ratings.js';
import { importRatingBatches } from '../../store/import-core.js';
import { fileInput, importRatings, READ_IN_WORKER_BYTES, type ImportReport, type ImportRequest } from '../../store/import-ratings.js';
import { openStore, type Database } from '../../store/open-store.js';
import { countOf, exportText, tempFolder } from './helpers.js';
import { designForRatings, syntheticLongLines, syntheticWideLines, writeSyntheticLongCsv, type SyntheticDesign } from './synthetic-ratings.js';

let folder: string;
let remove: () => void;
const stores: Database[] = [];
beforeEach(() => {
  ({ folder, remove } = tempFolder('import-worker'));
});
afterEach(() => {
  for (const db of stores.splice(0)) db.close();
  remove();
});

function store(name: string): Database {
  const db = openStore(join(folder, `${name}.db`));
  stores.push(db);
  return db;
}

function file(name: string, lines: Iterable<string>): string {
  const path = join(folder, name);
  writeFileSync(path, `${[...lines].join('\n')}\n`);
  return path;
}

const DESIGN: SyntheticDesign = { sessions: 3, assessors: 4, products: 3, replicates: 2, attributes: 5, seed: 7 };

function request(path: string, extra: Partial<ImportRequest> = {}): ImportRequest {
  return { panel: 'crisps', fileName: 'week.csv', source: 'cli', input: fileInput(path), scale: { min: 0, max: 10 }, quarantine: false, now: () => new Date('2026-03-01T00:00:00Z'), ...extra };
}

/** The report without what differs between two stores by construction. */
const comparable = (report: ImportReport): object => ({ ...report, importId: null });

describe('compact batches', () => {
  it('intern names once across batches and keep problems at their place among the ratings', () => {
    const rating = (row: number, session: string, attribute: string, value: number, code: string | null): ReadEvent => ({
      type: 'rating',
      row,
      column: 'value',
      rating: { session, date: '2026-01-05', assessor: 'A1', product: 'P1', replicate: 1, attribute, value, code },
    });
    const problem: ReadEvent = { type: 'problem', cell: null, problem: { code: 'not-a-number', file: 'f.csv', row: 3, column: 'value', message: 'm' } };
    const encoder = new CompactEncoder();
    const first = encoder.encode([rating(2, 'S1', 'sweet', 5.5, '101'), problem, { type: 'missing', row: 4, column: 'salty', cell: null as never }, rating(5, 'S1', 'salty', 1, null)]);
    expect(first.nRatings).toBe(2);
    expect(first.newNames[0]).toEqual(['S1']);
    expect(first.newNames[1]).toEqual(['sweet', 'salty']);
    expect(first.newNames[5]).toEqual(['101']);
    expect(Array.from(first.keys.subarray(0, KEY_FIELDS))).toEqual([1, 1, 1, 1, 1, 2, 1, 1, 1]);
    expect(first.keys[KEY_FIELDS + F_CODE]).toBe(0); // no sample code
    expect(Array.from(first.values)).toEqual([5.5, 1]);
    expect(first.others).toEqual([{ at: 1, event: problem }]);
    expect(first).toMatchObject({ nMissing: 1, maxRow: 5 });
    const second = encoder.encode([rating(6, 'S2', 'sweet', 2, '101')]);
    expect(second.newNames[0]).toEqual(['S2']);
    expect(second.newNames[1]).toEqual([]);
    expect(second.keys[F_SESSION]).toBe(2);
  });
});

describe('reading on a worker thread', () => {
  it('gives the same store and report as reading on this thread, long and wide, with duplicates and missing cells', async () => {
    const long = [...syntheticLongLines(DESIGN)];
    long.push(long[7]); // an exact duplicate row
    const wide = [...syntheticWideLines(DESIGN)];
    wide[3] = wide[3].replace(/,[^,]*$/, ','); // one missing cell
    for (const [name, lines] of [['long.csv', long], ['wide.csv', wide]] as const) {
      const path = file(name, lines);
      const inThread = store(`${name}-thread`);
      const inWorker = store(`${name}-worker`);
      const a = await importRatings(inThread, request(path, { reader: 'in-thread' }));
      const b = await importRatings(inWorker, request(path, { reader: 'worker' }));
      expect(a.outcome).toBe('imported');
      expect(comparable(b)).toEqual(comparable(a));
      expect(await exportText(inWorker, 'crisps')).toBe(await exportText(inThread, 'crisps'));
      // Identical content again: unchanged, and the worker started for it is ended (the test would hang otherwise).
      expect((await importRatings(inWorker, request(path, { reader: 'worker' }))).outcome).toBe('unchanged');
    }
    expect(long.length).toBeGreaterThan(100);
  });

  it('names problems by file, row and column, and quarantines the same cells', async () => {
    const lines = [...syntheticLongLines(DESIGN)];
    lines[10] = lines[10].replace(/,[\d.]+,(\d+)$/, ',73,$1'); // decimal shift on row 11
    lines[20] = lines[20].replace(/,[\d.]+,(\d+)$/, ',abc,$1'); // not a number on row 21
    const path = file('bad.csv', lines);
    const rejected = await importRatings(store('reject'), request(path, { reader: 'worker' }));
    expect(rejected.outcome).toBe('rejected');
    expect(rejected.errors.map((e) => [e.code, e.file, e.row, e.column])).toEqual([
      ['decimal-shift', 'week.csv', 11, 'value'],
      ['not-a-number', 'week.csv', 21, 'value'],
    ]);
    const inThread = store('q-thread');
    const inWorker = store('q-worker');
    const a = await importRatings(inThread, request(path, { reader: 'in-thread', quarantine: true }));
    const b = await importRatings(inWorker, request(path, { reader: 'worker', quarantine: true }));
    expect(a.counts.quarantined).toBe(2);
    expect(comparable(b)).toEqual(comparable(a));
    const held = (db: Database) => db.prepare('SELECT row_number, column_name, raw_value, reason_code FROM quarantine ORDER BY row_number').all();
    expect(held(inWorker)).toEqual(held(inThread));
  });

  it('a worker that fails part-way writes nothing: the import is rejected as unreadable', async () => {
    const db = store('crash');
    const path = file('week.csv', syntheticLongLines(DESIGN));
    expect((await importRatings(db, request(path, { fileName: 'first.csv', reader: 'in-thread' }))).outcome).toBe('imported');
    const before = await exportText(db, 'crisps');
    const nImports = countOf(db, 'import');
    const changed = file('changed.csv', syntheticLongLines({ ...DESIGN, seed: 8 }));
    // A failure after the first batch: its ratings were staged already, and each of them would replace a stored one.
    const reading = readInWorker(fileInput(changed), { fileName: 'changed.csv', scales: { known: [], fallback: { min: 0, max: 10 } }, eventsPerBatch: 20, failAfterBatches: 1 });
    const report = await importRatingBatches(db, { panel: 'crisps', fileName: 'changed.csv', source: 'cli', sha256: 'x', quarantine: false, scale: { min: 0, max: 10 } }, reading.batches);
    expect(report.outcome).toBe('rejected');
    expect(report.counts.ratings).toBeGreaterThan(0);
    expect(report.errors).toEqual([expect.objectContaining({ code: 'file-unreadable', file: 'changed.csv', row: null })]);
    expect(await exportText(db, 'crisps')).toBe(before);
    expect(countOf(db, 'rating_correction')).toBe(0);
    expect(countOf(db, 'import')).toBe(nImports + 1); // the rejection, in the existing panel's log
  });

  it('a consumer that stops early ends the worker', async () => {
    const path = file('week.csv', syntheticLongLines(DESIGN));
    const reading = readInWorker(fileInput(path), { fileName: 'week.csv', scales: { known: [], fallback: { min: 0, max: 10 } }, eventsPerBatch: 10, maxInFlight: 1 });
    let n = 0;
    for await (const batch of reading.batches) {
      n += batch.nRatings;
      break;
    }
    expect(n).toBeGreaterThan(0);
    await reading.stop();
  });
});

const ROOT = join(import.meta.dirname, '..', '..');
const BUILT_WORKER = existsSync(join(ROOT, 'dist', 'ingest', 'read-worker.js'));

describe('the built program reads a large file on a worker thread', () => {
  // `npm test` builds first; a plain `npx vitest run` without a current dist/ skips this.
  it.skipIf(!BUILT_WORKER)('imports it, and rejects a bad copy under a new panel writing nothing', async () => {
    const design = designForRatings(150_000, 3);
    const good = join(folder, 'year.csv');
    const nRatings = await writeSyntheticLongCsv(good, design);
    expect(statSync(good).size).toBeGreaterThanOrEqual(READ_IN_WORKER_BYTES);
    const bad = join(folder, 'year-bad.csv');
    await writeSyntheticLongCsv(bad, design, (line, row) => (row === 120_000 ? line.replace(/,[\d.]+,(\d+)$/, ',x,$1') : line));
    const run = (...args: string[]) => spawnSync(process.execPath, ['bin/panel-steward', ...args], { cwd: ROOT, encoding: 'utf8', timeout: 90_000 });
    const db = join(folder, 'built.db');
    const imported = run('import', good, '--panel', 'crisps', '--db', db, '--scale', '0:10');
    expect(imported.stderr).toBe('');
    expect(imported.stdout).toMatch(new RegExp(`^Imported ${nRatings.toLocaleString('en-US')} ratings`));
    const rejected = run('import', bad, '--panel', 'new-panel', '--db', db, '--scale', '0:10');
    expect(rejected.status).toBe(1);
    expect(rejected.stderr).toMatch(/^year-bad\.csv:120000:value: "x" is not a number/);
    const check = openStore(db);
    stores.push(check);
    expect(check.prepare('SELECT name FROM panel').all()).toEqual([{ name: 'crisps' }]);
    expect(countOf(check, 'rating')).toBe(nRatings);
  }, 180_000);
});
