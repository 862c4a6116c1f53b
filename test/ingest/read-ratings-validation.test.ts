/**
 * Row-level validation: every rule on a real file, each problem naming file, the row a
 * spreadsheet shows (header = 1, a quoted line break does not start a new row) and the column.
 */
import { describe, expect, it } from 'vitest';
import { UNEXPECTED_READ_FAILURE } from '../../ingest/read-ratings.js';
import { readAll, readFixture, readText, where } from './helpers.js';

describe('validation-long.csv (scale 0–10)', async () => {
  const r = await readFixture('validation-long.csv');

  it('names each bad cell by row and column', () => {
    expect(where(r.problems)).toEqual([
      [3, 'replicate', 'replicate-not-positive-integer'], // 0
      [4, 'replicate', 'replicate-not-positive-integer'], // -1
      [5, 'replicate', 'replicate-not-positive-integer'], // 1.5
      [6, 'replicate', 'replicate-not-positive-integer'], // 2a
      [7, 'date', 'invalid-date'], // 2025-02-30
      [8, 'date', 'invalid-date'], // 03/04/2025 (ambiguous)
      [9, 'value', 'not-finite'], // NaN
      [10, 'value', 'not-finite'], // Infinity
      [11, 'value', 'not-finite'], // 1e999
      [12, 'value', 'missing-value'], // empty value in long form
      [13, 'value', 'not-a-number'], // abc
      [14, 'value', 'decimal-shift'], // 73
      [15, 'value', 'out-of-scale'], // -3
      [16, 'assessor', 'missing-value'],
      [17, null, 'row-field-count'], // an extra field
      [18, null, 'row-field-count'], // fields missing
      // row 19 is blank and skipped
      [20, 'value', 'not-a-number'], // "1,500": decimal mark or thousands separator?
      [22, 'session', 'name-invalid'], // "two⏎lines": a line break in a name (a control character)
      [23, 'value', 'out-of-scale'], // 1100 (line 24: row 22 spans two lines): neither /10 nor /100 is on the scale
    ]);
    expect(r.problems.every((p) => p.file === 'validation-long.csv')).toBe(true);
  });

  it('quotes the offending text and says what to do', () => {
    const byRow = new Map(r.problems.map((p) => [p.row, p]));
    expect(byRow.get(5)).toMatchObject({ value: '1.5', message: expect.stringMatching(/positive whole number/) });
    expect(byRow.get(7)).toMatchObject({ value: '2025-02-30', message: expect.stringMatching(/does not exist/) });
    expect(byRow.get(8)!.message).toMatch(/ambiguous.*YYYY-MM-DD/);
    expect(byRow.get(14)!.message).toBe('73 on a 0–10 scale looks like a decimal shift of 7.3; correct the value.');
    expect(byRow.get(15)!.message).toBe('-3 is outside the 0–10 scale of attribute "crunchy".');
    expect(byRow.get(20)!.message).toMatch(/ambiguous.*1500.*1\.500/);
    expect(byRow.get(17)!.message).toMatch(/8 cells but the header row has 7 columns/);
  });

  it('keeps the good rows: decimal comma in quotes, HTML and formula text as data, dotted dates; reads past a quoted line break', () => {
    expect(r.ratingEvents.map((e) => [e.row, e.rating.session, e.rating.assessor, e.rating.product, e.rating.date, e.rating.value])).toEqual([
      [2, 'W01', 'A01', 'Ref', '2025-03-04', 5.5],
      [21, 'W01', 'A01', 'Ref', '2025-03-04', 4.5],
      [24, 'W01', 'A01', '<b onmouseover="x">B</b>', '2025-03-04', 5],
      [25, 'W01', '=HYPERLINK("x")', 'Ref', '2025-03-04', 5],
      [26, 'W01', 'A01', 'Ref', '2025-03-04', 5],
      [27, 'W01', 'A01', 'Ref', '2025-03-04', 10],
    ]);
  });

  it('hands each rejected value cell to the quarantine once, with its raw text', () => {
    const cellRows = r.problemEvents.filter((e) => e.cell !== null).map((e) => e.problem.row);
    // Field-count rows have no reliable cells; every other problem row carries its one value cell.
    expect(cellRows).toEqual([3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 20, 22, 23]);
    const shift = r.problemEvents.find((e) => e.problem.row === 14)!;
    expect(shift.cell).toEqual({ session: 'W01', date: '2025-03-04', assessor: 'A01', product: 'Ref', replicate: '1', attribute: 'crunchy', rawValue: '73', code: null });
    expect(r.problemEvents.find((e) => e.problem.row === 12)!.cell!.rawValue).toBeNull();
  });
});

describe('validation-wide.csv (CRLF, trailing unnamed columns)', async () => {
  const r = await readFixture('validation-wide.csv');

  it('names problems by row and attribute column', () => {
    expect(where(r.problems)).toEqual([
      [3, 'replicate', 'replicate-not-positive-integer'],
      [4, 'column 8', 'header-unknown-column'],
      [5, 'crunchy', 'not-a-number'],
      [5, 'salty', 'out-of-scale'],
      [6, 'crunchy', 'decimal-shift'], // 250 → 2.5 (÷100)
      [7, 'date', 'missing-value'],
    ]);
    expect(r.problems[4].message).toBe('250 on a 0–10 scale looks like a decimal shift of 2.5; correct the value.');
  });

  it('a bad key rejects every value cell of the row exactly once', () => {
    const replicate = r.problemEvents[0];
    expect(replicate.cell).toMatchObject({ replicate: 'x', attribute: 'crunchy', rawValue: '5' });
    expect(replicate.moreCells).toEqual([expect.objectContaining({ replicate: 'x', attribute: 'salty', rawValue: '6' })]);
    expect(r.rejectedCells.map((c) => `${c.replicate}/${c.attribute}/${c.rawValue}`)).toEqual([
      'x/crunchy/5',
      'x/salty/6',
      '2/crunchy/5',
      '2/salty/6',
      '3/crunchy/abc',
      '3/salty/-1',
      '4/crunchy/250',
      '5/crunchy/1',
      '5/salty/2',
    ]);
  });

  it('keeps the good cells and reports the empty one as missing', () => {
    expect(r.ratingEvents.map((e) => [e.row, e.column, e.rating.value])).toEqual([
      [2, 'crunchy', 5],
      [6, 'salty', 10],
    ]);
    expect(r.missing.map((m) => [m.row, m.column])).toEqual([[2, 'salty']]);
  });
});

describe('header rules', () => {
  it('duplicate headers, exact or via synonyms, are named', async () => {
    const r = await readText('session,date,assessor,product,replicate,sweet,Sweet,panelist\nS,2025-01-01,a,p,1,1,2,b\n');
    expect(where(r.problems)).toEqual([
      [1, 'Sweet', 'header-duplicate-column'],
      [1, 'panelist', 'header-duplicate-column'],
    ]);
    expect(r.problems[1].message).toBe('Columns "assessor" and "panelist" both mean assessor; keep one of them.');
    expect(r.ratings).toEqual([]);
  });

  it('a missing column is named, with the synonyms and the columns found', async () => {
    const r = await readText('session,date,judge,sample,attribute,score\nS,2025-01-01,a,p,sweet,1\n');
    expect(where(r.problems)).toEqual([[1, 'replicate', 'header-missing-column']]);
    expect(r.problems[0].message).toBe(
      'The header row has no "replicate" column (also accepted: rep, repetition, replication). Columns found: "session", "date", "judge", "sample", "attribute", "score".',
    );
  });

  it('long form needs both attribute and value; other columns are refused in long form', async () => {
    const r = await readText('session,date,assessor,product,replicate,attribute,comment\nS,2025-01-01,a,p,1,sweet,x\n');
    expect(where(r.problems)).toEqual([
      [1, 'value', 'header-missing-column'],
      [1, 'comment', 'header-unknown-column'],
    ]);
  });

  it('a wide file with an attribute named like the value column is told why it reads as long form', async () => {
    const r = await readText('session,date,assessor,product,replicate,sweet,Intensity\nS,2025-01-01,a,p,1,1,2\n');
    expect(where(r.problems)).toEqual([
      [1, 'attribute', 'header-missing-column'],
      [1, 'sweet', 'header-unknown-column'],
    ]);
    expect(r.problems[0].message).toMatch(/Column "Intensity" was taken as the value column of the long form/);
  });

  it('a header of key columns only has no attributes', async () => {
    const r = await readText('session,date,assessor,product,replicate\nS,2025-01-01,a,p,1\n');
    expect(where(r.problems)).toEqual([[1, 'attribute', 'header-missing-column']]);
  });

  it('a "sep=;" first line names the delimiter and is not a row', async () => {
    const r = await readText('sep=;\r\nsession;date;assessor;product;replicate;sweet\r\nS;2025-01-01;a;p;1;4,5\r\nS;2025-01-01;a;p;x;4,5\r\n');
    expect(r.ratings.map((x) => x.value)).toEqual([4.5]);
    expect(where(r.problems)).toEqual([[3, 'replicate', 'replicate-not-positive-integer']]);
  });

  it('leading blank lines move the header row down, and rows are counted from the top', async () => {
    const r = await readText('\n\nsession,date,assessor,product,replicate,sweet\nS,2025-01-01,a,p,0,1\n');
    expect(where(r.problems)).toEqual([[4, 'replicate', 'replicate-not-positive-integer']]);
  });

  it('too many columns', async () => {
    const header = ['session', 'date', 'assessor', 'product', 'replicate', ...Array.from({ length: 100_000 }, (_, i) => `a${i}`)].join(',');
    const r = await readText(`${header}\nS,2025-01-01,a,p,1${',1'.repeat(100_000)}\n`);
    expect(r.problems).toEqual([expect.objectContaining({ code: 'too-many-columns', row: 1, column: null })]);
    expect(r.problems[0].message).toMatch(/100005 columns.*2000/);
  });
});

describe('attribute count in long form', () => {
  it('more different attributes than maxColumns ends the reading at the row that adds one too many', async () => {
    const rows = Array.from({ length: 30 }, (_, i) => `S,2025-01-01,a,p,1,attr${i + 1},5`);
    const r = await readText(`session,date,assessor,product,replicate,attribute,value\n${rows.join('\n')}\n`, { maxColumns: 20 });
    expect(r.ratings).toHaveLength(21);
    expect(where(r.problems)).toEqual([[22, 'attribute', 'too-many-columns']]);
    expect(r.problems[0].message).toMatch(/more than 20 different attributes/);
  });
});

describe('file-level problems', () => {
  it.each([
    ['an empty file', '', 'file-empty', null],
    ['only blank lines', '\r\n\r\n', 'file-empty', null],
    ['a header only', 'session,date,assessor,product,replicate,attribute,value\r\n', 'file-empty', 2],
  ])('%s', async (_label, text, code, row) => {
    const r = await readText(text);
    expect(r.problems).toEqual([expect.objectContaining({ code, row, file: 'upload.csv' })]);
  });

  it.each([
    ['a PNG image', [0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0, 0, 0, 13], /not a spreadsheet/],
    ['an old .xls workbook', [0xd0, 0xcf, 0x11, 0xe0, 0xa1, 0xb1, 0x1a, 0xe1], /old-style \.xls/],
    ['a zip that is not a workbook', [0x50, 0x4b, 0x03, 0x04, 1, 2, 3, 4, 5, 6], /could not be read/],
  ])('%s is refused', async (_label, bytes, message) => {
    const r = await readAll({ bytes: new Uint8Array(bytes) });
    expect(r.problems).toHaveLength(1);
    expect(r.problems[0]).toMatchObject({ code: expect.stringMatching(/file-unreadable/), message: expect.stringMatching(message) });
    expect(r.problems[0].message).not.toBe(UNEXPECTED_READ_FAILURE);
  });

  it('a NUL byte (binary data) names its row', async () => {
    const r = await readText('session,date,assessor,product,replicate,sweet\nS,2025-01-01,a,p,1,1\nS,2025-01-01,a\u0000,p,2,1\n');
    expect(r.problems).toEqual([expect.objectContaining({ code: 'file-unreadable', row: 3, message: expect.stringMatching(/binary data/) })]);
  });

  it('an unclosed quote names the row where it opens', async () => {
    const r = await readText('session,date,assessor,product,replicate,sweet\nS,2025-01-01,a,p,1,1\nS,2025-01-01,"a,p,2,1\nS,2025-01-01,b,p,2,1\n');
    expect(r.problems.at(-1)).toMatchObject({ code: 'file-unreadable', row: 3, message: expect.stringMatching(/never closed/) });
  });

  it('stray quotes inside a cell are kept as text (relax_quotes), not guessed away', async () => {
    const r = await readText('session,date,assessor,product,replicate,sweet\nS,2025-01-01,"a"b,12" plate,1,1\n');
    expect(r.problems).toEqual([]);
    expect(r.ratings[0]).toMatchObject({ assessor: '"a"b', product: '12" plate' });
  });

  it('a multi-megabyte cell is refused by row and column without holding up the rest', async () => {
    const big = 'x'.repeat(3_000_000);
    const r = await readText(`session,date,assessor,product,replicate,sweet\nS,2025-01-01,${big},p,1,1\nS,2025-01-01,b,p,1,2\n`);
    expect(where(r.problems)).toEqual([[2, 'assessor', 'cell-too-long']]);
    expect(r.problems[0].value!.length).toBeLessThanOrEqual(80);
    expect(r.ratings.map((x) => x.value)).toEqual([2]);
    expect(r.rejectedCells).toEqual([expect.objectContaining({ attribute: 'sweet', rawValue: '1' })]);
  });
});

describe('scales', () => {
  const text = 'session,date,assessor,product,replicate,attribute,value\nS,2025-01-01,a,p,1,sweet,73\nS,2025-01-01,a,p,1,sour,5\nS,2025-01-01,a,p,2,sweet,5\n';

  it('an attribute without a scale is one problem saying how to give it; the scale is asked once', async () => {
    const asked: string[] = [];
    const r = await readText(text, {
      scaleFor: (attribute) => {
        asked.push(attribute);
        return attribute === 'sour' ? { min: 0, max: 10 } : null;
      },
    });
    expect(asked).toEqual(['sweet', 'sour']);
    expect(where(r.problems)).toEqual([[2, 'attribute', 'scale-missing']]);
    expect(r.problems[0].message).toMatch(/--scale MIN:MAX.*upload form.*panel settings file/);
  });

  it("'unchecked' reads values without a scale check", async () => {
    const r = await readText(text, { scaleFor: () => 'unchecked' });
    expect(r.problems).toEqual([]);
    expect(r.ratings.map((x) => x.value)).toEqual([73, 5, 5]);
  });

  it('the scale end points are inside the scale', async () => {
    const r = await readText('session,date,assessor,product,replicate,sweet\nS,2025-01-01,a,p,1,0\nS,2025-01-01,a,p,2,10\n');
    expect(r.problems).toEqual([]);
  });

  it('wide form asks for scales at the header row', async () => {
    const r = await readText('session,date,assessor,product,replicate,sweet,sour\nS,2025-01-01,a,p,1,1,2\n', {
      scaleFor: (a) => (a === 'sour' ? null : { min: 0, max: 10 }),
    });
    expect(where(r.problems)).toEqual([[1, 'sour', 'scale-missing']]);
  });
});
