/**
 * Decompression bombs: a small .xlsx that unzips to a huge cell or a huge sheet is refused
 * while unzipping, with the limit in the message, before the cell is held in memory.
 */
import { statSync } from 'node:fs';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { tempFolder } from '../store/helpers.js';
import { readAll } from './helpers.js';
import { writeXlsxBomb } from './xlsx-bomb.js';

let folder: string;
let remove: () => void;
beforeEach(() => ({ folder, remove } = tempFolder('bomb')));
afterEach(() => remove());

describe('xlsx limits checked while unzipping', () => {
  it('a 200 MB cell in a file of about 200 KB fails at the cell limit, naming the cell, without holding the cell', async () => {
    const path = join(folder, 'bomb.xlsx');
    const { fileBytes, sheetBytes } = await writeXlsxBomb(path, 200 * 1024 * 1024);
    expect(fileBytes).toBeLessThan(sheetBytes / 500);
    expect(statSync(path).size).toBe(fileBytes);
    global.gc?.();
    const rssBefore = process.memoryUsage().rss;
    const r = await readAll({ path }, { fileName: 'bomb.xlsx' });
    const rssGrowth = process.memoryUsage().rss - rssBefore;
    expect(r.problems).toEqual([
      expect.objectContaining({
        code: 'cell-too-long',
        file: 'bomb.xlsx',
        row: 2,
        message: 'Cell C2 holds more than 10,000 characters, the most a cell may hold. The workbook was not read further.',
      }),
    ]);
    expect(r.ratings).toEqual([]);
    // Holding the cell would cost at least its 200 MB; exceljs and zlib buffers are far less.
    expect(rssGrowth).toBeLessThan(120 * 1024 * 1024);
  }, 60_000);

  it('counts characters, not bytes: 10,000 characters pass (with a character reference and two-byte letters), 10,001 do not', async () => {
    const atLimit = join(folder, 'at-limit.xlsx');
    await writeXlsxBomb(atLimit, 10_000, 'A');
    let r = await readAll({ path: atLimit }, { fileName: 'at-limit.xlsx' });
    expect(r.problems).toEqual([]);
    expect(r.ratings[0].assessor).toHaveLength(10_000);

    // 5,000 two-byte letters (10,000 bytes): within the limit.
    const accented = join(folder, 'accented.xlsx');
    await writeXlsxBomb(accented, 10_000, 'é');
    r = await readAll({ path: accented }, { fileName: 'accented.xlsx' });
    expect(r.problems).toEqual([]);
    expect(r.ratings[0].assessor).toBe('é'.repeat(5_000));

    // "x&amp;" 1,667 times: 10,002 bytes of XML, 3,334 characters.
    const references = join(folder, 'references.xlsx');
    await writeXlsxBomb(references, 10_002, 'x&amp;');
    r = await readAll({ path: references }, { fileName: 'references.xlsx' });
    expect(r.problems).toEqual([]);
    expect(r.ratings[0].assessor).toBe('x&'.repeat(1_667));

    const over = join(folder, 'over.xlsx');
    await writeXlsxBomb(over, 10_001, 'A');
    r = await readAll({ path: over }, { fileName: 'over.xlsx' });
    expect(r.problems.map((p) => [p.code, p.row, p.message])).toEqual([
      ['cell-too-long', 2, 'Cell C2 holds more than 10,000 characters, the most a cell may hold. The workbook was not read further.'],
    ]);
  });

  it('a workbook that unzips to more than the size limit fails with the limit in the message', async () => {
    const path = join(folder, 'wide.xlsx');
    await writeXlsxBomb(path, 3 * 1024 * 1024);
    const r = await readAll({ path }, { fileName: 'wide.xlsx', maxCellChars: 10_000_000, maxXlsxExpandedBytes: 2 * 1024 * 1024 });
    expect(r.problems.map((p) => [p.code, p.message])).toEqual([
      ['file-too-large', 'The workbook expands to more than 2 MB when unzipped, the most this reader accepts. Save the ratings as CSV, or split them into smaller workbooks.'],
    ]);
  });
});
