/** importRatings end to end through real files (the ingest reader and the store together). */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import ExcelJS from 'exceljs';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { MAX_LISTED_PROBLEMS } from '../../domain/problems.js';
import { fileInput, importRatings, type ImportRequest } from '../../store/import-ratings.js';
import { openStore, type Database } from '../../store/open-store.js';
import { countOf, exportText, tempFolder } from './helpers.js';
import { syntheticLongLines, syntheticWideLines, writeSyntheticLongCsv, type SyntheticDesign } from './synthetic-ratings.js';

const HEADER = 'session,date,assessor,product,replicate,attribute,value';
let folder: string;
let remove: () => void;
let db: Database;
beforeEach(() => {
  ({ folder, remove } = tempFolder('import'));
  db = openStore(join(folder, 'store.db'));
});
afterEach(() => {
  db.close();
  remove();
});

function file(name: string, lines: string[]): string {
  const path = join(folder, name);
  writeFileSync(path, `${lines.join('\n')}\n`);
  return path;
}

function request(path: string, extra: Partial<ImportRequest> = {}): ImportRequest {
  return { panel: 'crisps', fileName: path.split('/').pop()!, source: 'cli', input: fileInput(path), scale: { min: 0, max: 10 }, quarantine: false, ...extra };
}

const GOOD = ['S1,2026-01-05,A1,P1,1,crunchiness,5', 'S1,2026-01-05,A1,P2,1,crunchiness,6.5', 'S1,2026-01-05,A2,P1,1,crunchiness,4'];

describe('validation through real files: any problem rejects the whole file and writes no ratings', () => {
  const cases: { name: string; lines: string[]; code: string; row: number | null; column: string | null }[] = [
    { name: 'a required column missing', lines: ['session,date,assessor,product,attribute,value', 'S1,2026-01-05,A1,P1,crunchiness,5'], code: 'header-missing-column', row: 1, column: null },
    { name: 'a value that is not a number', lines: [HEADER, ...GOOD, 'S1,2026-01-05,A2,P2,1,crunchiness,five'], code: 'not-a-number', row: 5, column: 'value' },
    { name: 'a value outside the scale', lines: [HEADER, ...GOOD, 'S1,2026-01-05,A2,P2,1,crunchiness,-3'], code: 'out-of-scale', row: 5, column: 'value' },
    { name: 'a suspected decimal shift', lines: [HEADER, ...GOOD, 'S1,2026-01-05,A2,P2,1,crunchiness,73'], code: 'decimal-shift', row: 5, column: 'value' },
    { name: 'a replicate that is not a positive integer', lines: [HEADER, ...GOOD, 'S1,2026-01-05,A2,P2,0,crunchiness,5'], code: 'replicate-not-positive-integer', row: 5, column: 'replicate' },
    { name: 'an impossible date', lines: [HEADER, 'S1,2026-02-30,A1,P1,1,crunchiness,5'], code: 'invalid-date', row: 2, column: 'date' },
    { name: 'conflicting duplicate keys', lines: [HEADER, ...GOOD, 'S1,2026-01-05,A1,P2,1,crunchiness,7'], code: 'conflicting-duplicate', row: 5, column: 'value' },
    { name: 'a session label with two dates', lines: [HEADER, ...GOOD, 'S1,2026-01-06,A2,P2,1,crunchiness,5'], code: 'session-date-conflict', row: 5, column: 'date' },
  ];
  for (const c of cases) {
    it(c.name, async () => {
      const report = await importRatings(db, request(file('bad.csv', c.lines)));
      expect(report.ok).toBe(false);
      expect(report.outcome).toBe('rejected');
      expect(report.errors[0]).toMatchObject({ code: c.code, file: 'bad.csv', row: c.row });
      if (c.column !== null) expect(report.errors[0].column).toBe(c.column);
      expect(report.message).toMatch(/^bad\.csv was not imported: 1 problem found, nothing was written/);
      expect(countOf(db, 'rating')).toBe(0);
      expect(countOf(db, 'session')).toBe(0);
      // The panel is new: not even the panel or an import-log row is written.
      expect(report.importId).toBeNull();
      expect(countOf(db, 'panel')).toBe(0);
      expect(countOf(db, 'import')).toBe(0);
    });
  }

  it('a rejected import under a new panel name leaves no panel behind; under an existing one it is logged', async () => {
    const bad = [HEADER, ...GOOD, 'S2,2026-01-12,A2,P2,1,crunchiness,five'];
    const rejectedNew = await importRatings(db, request(file('bad.csv', bad), { panel: 'brand-new' }));
    expect(rejectedNew).toMatchObject({ ok: false, outcome: 'rejected', importId: null });
    expect(db.prepare('SELECT name FROM panel').all()).toEqual([]);
    expect(countOf(db, 'import')).toBe(0);
    expect((await importRatings(db, request(file('good.csv', [HEADER, ...GOOD]), { panel: 'brand-new' }))).outcome).toBe('imported');
    const before = await exportText(db, 'brand-new');
    const rejectedOld = await importRatings(db, request(file('bad.csv', bad), { panel: 'brand-new' }));
    expect(rejectedOld.outcome).toBe('rejected');
    expect(db.prepare('SELECT outcome, n_errors AS n FROM import WHERE id = ?').get(rejectedOld.importId)).toEqual({ outcome: 'rejected', n: 1 });
    expect(await exportText(db, 'brand-new')).toBe(before);
  });

  it('a scale missing for a new attribute, saying how to give it', async () => {
    const report = await importRatings(db, request(file('week.csv', [HEADER, ...GOOD]), { scale: undefined }));
    expect(report.outcome).toBe('rejected');
    expect(report.errors).toHaveLength(1);
    expect(report.errors[0].code).toBe('scale-missing');
    expect(report.errors[0].message).toMatch(/--scale MIN:MAX/);
    expect(countOf(db, 'attribute')).toBe(0);
  });

  it('a session date differing from the stored one', async () => {
    expect((await importRatings(db, request(file('w1.csv', [HEADER, ...GOOD])))).outcome).toBe('imported');
    const report = await importRatings(db, request(file('w2.csv', [HEADER, 'S1,2026-01-12,A1,P1,1,crunchiness,5'])));
    expect(report.errors).toEqual([expect.objectContaining({ code: 'session-date-conflict', row: 2, column: 'date' })]);
    expect(countOf(db, 'rating')).toBe(3);
  });

  it('exact duplicate rows are named and stored once', async () => {
    const report = await importRatings(db, request(file('dup.csv', [HEADER, ...GOOD, GOOD[1]])));
    expect(report.outcome).toBe('imported');
    expect(report.findings).toContainEqual(expect.objectContaining({ code: 'duplicate-row', row: 5 }));
    expect(countOf(db, 'rating')).toBe(3);
  });

  it('a file that cannot be opened, and a wide file with no ratings at all', async () => {
    const gone = await importRatings(db, request(join(folder, 'gone.csv')));
    expect(gone).toMatchObject({ ok: false, outcome: 'rejected', errors: [{ code: 'file-unreadable', file: 'gone.csv', row: null }] });
    expect(gone.message).not.toContain(folder);
    const empty = await importRatings(db, request(file('empty.csv', ['session,date,assessor,product,replicate,sweet,salty', 'S1,2026-01-05,A1,P1,1,,'])));
    expect(empty).toMatchObject({ ok: true, outcome: 'unchanged', counts: { ratings: 0, missingCells: 2 } });
    expect(empty.message).toBe('empty.csv holds no ratings (2 empty cells); nothing was stored.');
  });

  it('lists at most the first 100 problems with the total', async () => {
    const lines = [HEADER];
    for (let i = 0; i < 250; i++) lines.push(`S1,2026-01-05,A${i},P1,1,crunchiness,bad`);
    const report = await importRatings(db, request(file('many.csv', lines)));
    expect(report.errors).toHaveLength(MAX_LISTED_PROBLEMS);
    expect(report.totalErrors).toBe(250);
    expect(report.errors[99].row).toBe(101);
  });
});

describe('idempotence, replacement, quarantine', () => {
  it('importing the identical file again changes nothing and says so', async () => {
    const path = file('week.csv', [HEADER, ...GOOD]);
    const first = await importRatings(db, request(path));
    const before = await exportText(db, 'crisps');
    const again = await importRatings(db, request(path, { source: 'web' }));
    expect(again.outcome).toBe('unchanged');
    expect(again.ok).toBe(true);
    expect(again.sha256).toBe(first.sha256);
    expect(again.message).toContain(`import #${first.importId}`);
    expect(await exportText(db, 'crisps')).toBe(before);
    expect(db.prepare('SELECT data_version AS v FROM session').all()).toEqual([{ v: 1 }]);
    expect(db.prepare('SELECT outcome FROM import ORDER BY id').all()).toEqual([{ outcome: 'imported' }, { outcome: 'unchanged' }]);
  });

  it('a corrected file replaces the session and keeps the old values in the correction history', async () => {
    const first = await importRatings(db, request(file('w1.csv', [HEADER, ...GOOD])));
    const second = await importRatings(db, request(file('w1-fixed.csv', [HEADER, GOOD[0], 'S1,2026-01-05,A1,P2,1,crunchiness,7', GOOD[2]])));
    expect(second.counts).toMatchObject({ sessionsReplaced: 1, valuesReplaced: 1 });
    expect(db.prepare('SELECT old_value AS oldValue, new_value AS newValue, old_import_id AS was, replaced_by_import_id AS by FROM rating_correction').all()).toEqual([
      { oldValue: 6.5, newValue: 7, was: first.importId, by: second.importId },
    ]);
  });

  it('with quarantine the valid rows are stored and the bad cells held with their reason', async () => {
    const report = await importRatings(db, request(file('q.csv', [HEADER, ...GOOD, 'S1,2026-01-05,A2,P2,1,crunchiness,73', 'S1,2026-01-05,A3,P1,x,crunchiness,5']), { quarantine: true }));
    expect(report.outcome).toBe('quarantined');
    expect(report.counts).toMatchObject({ ratings: 3, quarantined: 2 });
    expect(db.prepare('SELECT row_number AS row, column_name AS col, reason_code AS code, raw_value AS raw, replicate FROM quarantine ORDER BY row_number').all()).toEqual([
      { row: 5, col: 'value', code: 'decimal-shift', raw: '73', replicate: '1' },
      { row: 6, col: 'replicate', code: 'replicate-not-positive-integer', raw: '5', replicate: 'x' },
    ]);
    // A wide row with two bad key cells: all its values held once, under its first problem.
    const wide = await importRatings(
      db,
      request(file('w.csv', ['session,date,assessor,product,replicate,crunchiness,saltiness', 'S2,2026-01-12,A1,P1,1,4,5', 'S2,2026-13-12,A2,P1,0,6,7']), { quarantine: true }),
    );
    expect(wide.outcome).toBe('quarantined');
    expect(wide.totalErrors).toBe(2);
    expect(wide.counts).toMatchObject({ ratings: 2, quarantined: 2 });
    expect(db.prepare("SELECT attribute, raw_value AS raw, reason_code AS code FROM quarantine WHERE file_name = 'w.csv' ORDER BY attribute").all()).toEqual([
      { attribute: 'crunchiness', raw: '6', code: 'invalid-date' },
      { attribute: 'saltiness', raw: '7', code: 'invalid-date' },
    ]);
    const header = await importRatings(db, request(file('h.csv', ['session,assessor', 'S1,A1']), { quarantine: true }));
    expect(header.outcome).toBe('rejected');
  });
});

describe('several imports at once on one connection (as the service runs them)', () => {
  it('each is whole and none sees the other\'s staging', async () => {
    const paths = [0, 1, 2, 3].map((i) =>
      file(`part-${i}.csv`, [HEADER, ...Array.from({ length: 300 }, (_, k) => `S${i},2026-02-0${i + 1},A${k % 12},P${Math.floor(k / 12) % 5},${1 + Math.floor(k / 60)},crunchiness,${(k % 11) / 1.1}`)]),
    );
    // The same file twice among them: one of the two finds the other's sessions already stored.
    const reports = await Promise.all([...paths, paths[0]].map((path) => importRatings(db, request(path))));
    expect(reports.map((r) => r.ok)).toEqual([true, true, true, true, true]);
    expect(countOf(db, 'rating')).toBe(4 * 300);
    expect(reports.filter((r) => r.outcome === 'unchanged')).toHaveLength(1);
    expect(db.prepare("SELECT count(*) AS n FROM sqlite_temp_master WHERE type = 'table'").get()).toEqual({ n: 0 });
  });
});

describe('forms and round trips', () => {
  const design: SyntheticDesign = { sessions: 3, assessors: 4, products: 3, replicates: 2, attributes: 4, seed: 7 };

  it('long and wide forms of the same data give identical stores', async () => {
    const wideDb = openStore(join(folder, 'wide.db'));
    try {
      await importRatings(db, request(file('long.csv', [...syntheticLongLines(design)])));
      const wide = await importRatings(wideDb, request(file('wide.csv', [...syntheticWideLines(design)])));
      expect(wide.outcome).toBe('imported');
      expect(wide.counts.ratings).toBe(3 * 4 * 3 * 2 * 4);
      expect(await exportText(wideDb, 'crisps')).toBe(await exportText(db, 'crisps'));
    } finally {
      wideDb.close();
    }
  });

  it('an .xlsx workbook (wide, on a named sheet) gives the same store as the CSV', async () => {
    const workbook = new ExcelJS.Workbook();
    workbook.addWorksheet('notes').addRow(['not the ratings']);
    const sheet = workbook.addWorksheet('ratings');
    const wideLines = [...syntheticWideLines(design)];
    sheet.addRow(wideLines[0].split(','));
    for (const line of wideLines.slice(1)) {
      const cells = line.split(',');
      // keys as text, replicate and values as numbers, as a spreadsheet holds them
      sheet.addRow([cells[0], cells[1], cells[2], cells[3], Number(cells[4]), cells[5], ...cells.slice(6).map(Number)]);
    }
    const xlsxPath = join(folder, 'week.xlsx');
    await workbook.xlsx.writeFile(xlsxPath);
    const xlsxDb = openStore(join(folder, 'xlsx.db'));
    try {
      await importRatings(db, request(file('long.csv', [...syntheticLongLines(design)])));
      const report = await importRatings(xlsxDb, request(xlsxPath, { sheet: 'ratings' }));
      expect(report.outcome).toBe('imported');
      expect(await exportText(xlsxDb, 'crisps')).toBe(await exportText(db, 'crisps'));
      // Read on a worker thread (as large files are): the same store, and the sheet option reaches it.
      const inWorker = await importRatings(xlsxDb, request(xlsxPath, { panel: 'crisps-worker', sheet: 'ratings', reader: 'worker' }));
      expect(inWorker.counts).toEqual(report.counts);
      expect((await exportText(xlsxDb, 'crisps-worker')).replaceAll('crisps-worker', 'crisps')).toBe(await exportText(db, 'crisps'));
    } finally {
      xlsxDb.close();
    }
  });

  it('export → import → export is byte-identical, including formula-like names and awkward numbers', async () => {
    const lines = [
      'session,date,assessor,product,replicate,attribute,value,code',
      '=S1,2026-01-05,-A1,+P1,1,@crunch,0.30000000000000004,=1+1',
      '=S1,2026-01-05,-A1,+P1,2,@crunch,1e-7,',
      "=S1,2026-01-05,'=A2,P 2,1,@crunch,9.999999999999998,007",
      '"S,2",2026-01-12,"A ""3""",P1,1,"x, y",3.3333333333333335,',
    ];
    const first = await importRatings(db, request(file('odd.csv', lines)));
    expect(first.outcome).toBe('imported');
    const exported = await exportText(db, 'crisps');
    expect(exported.split('\n')[1]).toMatch(/^'=S1,/);
    const copyDb = openStore(join(folder, 'copy.db'));
    try {
      const back = await importRatings(copyDb, request(file('exported.csv', [exported.trimEnd()])));
      expect(back.outcome).toBe('imported');
      expect(await exportText(copyDb, 'crisps')).toBe(exported);
      // and the export imported into the store it came from changes nothing
      const same = await importRatings(db, request(join(folder, 'exported.csv')));
      expect(same.outcome).toBe('unchanged');
      expect(same.counts.sessionsUnchanged).toBe(2);
      const json = JSON.parse(await exportText(copyDb, 'crisps', 'json'));
      // Order: session date, session, attribute, assessor ('-' sorts before '='), product, replicate.
      expect(json[0]).toEqual({ session: '=S1', date: '2026-01-05', assessor: '-A1', product: '+P1', replicate: 1, attribute: '@crunch', value: 0.30000000000000004, code: '=1+1' });
      expect(json.map((r: { value: number }) => r.value)).toEqual([0.30000000000000004, 1e-7, 9.999999999999998, 3.3333333333333335]);
    } finally {
      copyDb.close();
    }
  });

  it('a file with one bad cell at row 50,000 is rejected naming it, and the next export is byte-identical', async () => {
    const big: SyntheticDesign = { sessions: 30, assessors: 12, products: 6, replicates: 2, attributes: 10, seed: 3 };
    const goodPath = join(folder, 'year.csv');
    await writeSyntheticLongCsv(goodPath, big);
    expect((await importRatings(db, request(goodPath))).counts.ratings).toBe(1440 * 30);
    const before = await exportText(db, 'crisps');
    // A corrected version (values changed in every session, so it would replace them) with one bad cell.
    const badPath = join(folder, 'year-v2.csv');
    const bigger: SyntheticDesign = { ...big, sessions: 36, seed: 4 }; // 51,841 rows
    await writeSyntheticLongCsv(badPath, bigger, (line, row) => (row === 50_000 ? line.replace(/,[^,]*,([^,]*)$/, ',12..5,$1') : line));
    const report = await importRatings(db, request(badPath));
    expect(report.outcome).toBe('rejected');
    expect(report.totalErrors).toBe(1);
    expect(report.errors[0]).toMatchObject({ row: 50_000, column: 'value', file: 'year-v2.csv' });
    expect(await exportText(db, 'crisps')).toBe(before);
  });
});
