/**
 * Cell readers and helpers. Calendar facts (leap years: divisible by 4, except centuries not
 * divisible by 400) are the Gregorian rule; the rest are this project's documented choices.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { parseRatingValue, parseReplicate, parseSessionDate } from '../../ingest/cells.js';
import { detectDelimiter } from '../../ingest/csv-records.js';
import { detectFileKind } from '../../ingest/file-kind.js';
import { normaliseHeaderName } from '../../ingest/headers.js';
import { neutralizeFormulaText, restoreFormulaText } from '../../ingest/spreadsheet-safe.js';

const value = (text: string, mark: '.' | ',' = '.') => {
  const r = parseRatingValue(text, mark);
  return r.ok ? r.value : r.code;
};

describe('parseRatingValue', () => {
  it.each([
    ['7', '.', 7],
    ['7.25', '.', 7.25],
    ['-0.5', '.', -0.5],
    ['+3', '.', 3],
    ['.5', '.', 0.5],
    ['1.0e1', '.', 10],
    ['4,5', '.', 4.5], // decimal comma, quoted in a comma file
    ['0,125', '.', 0.125], // a zero integer part cannot be a thousands group
    ['4,5', ',', 4.5],
    ['7.5', ',', 7.5], // dot accepted in a semicolon file
    ['1,500', ',', 1.5], // comma is the decimal mark of a semicolon file
    ['1.500', '.', 1.5],
    ['12.345', '.', 12.345],
  ] as const)('%s with decimal mark %s reads %s', (text, mark, expected) => {
    expect(value(text, mark)).toBe(expected);
  });

  it.each([
    ['1,500', '.', 'not-a-number'], // thousands separator or decimal comma: refused
    ['12,345', '.', 'not-a-number'],
    ['1.500', ',', 'not-a-number'],
    ['1,234.5', '.', 'not-a-number'],
    ['1.234,5', ',', 'not-a-number'],
    ['1,2,3', '.', 'not-a-number'],
    ['abc', '.', 'not-a-number'],
    ['0x10', '.', 'not-a-number'],
    ['5 cm', '.', 'not-a-number'],
    ['NaN', '.', 'not-finite'],
    ['-Infinity', '.', 'not-finite'],
    ['inf', '.', 'not-finite'],
    ['1e999', '.', 'not-finite'],
    ['-1e400', ',', 'not-finite'],
  ] as const)('%s with decimal mark %s is %s', (text, mark, code) => {
    expect(value(text, mark)).toBe(code);
  });

  it('reads back every finite double written by String()', () => {
    fc.assert(
      fc.property(fc.double({ noNaN: true, noDefaultInfinity: true }), (x) => {
        expect(value(String(x))).toBe(x === 0 ? 0 : x); // -0 reads as -0; toBe treats them apart
      }),
      { numRuns: 300 },
    );
  });
});

describe('parseReplicate', () => {
  it.each([
    ['1', 1],
    ['02', 2],
    ['+3', 3],
    ['2.0', 2],
    ['12', 12],
  ])('%s → %s', (text, expected) => {
    expect(parseReplicate(text)).toEqual({ ok: true, value: expected });
  });
  it.each(['0', '-1', '1.5', '2a', 'one', '1e3', '', '00', '9999999999'])('%s is refused', (text) => {
    expect(parseReplicate(text)).toMatchObject({ ok: false, code: 'replicate-not-positive-integer' });
  });
});

describe('parseSessionDate', () => {
  it.each([
    ['2025-03-04', '2025-03-04'],
    ['2024-02-29', '2024-02-29'], // leap year
    ['2000-02-29', '2000-02-29'], // divisible by 400
    ['2025-03-04T00:00:00', '2025-03-04'],
    ['2025-03-04 00:00', '2025-03-04'],
    ['04.03.2025', '2025-03-04'], // dotted: day first
    ['4.3.2025', '2025-03-04'],
    ['31.12.2025', '2025-12-31'],
  ])('%s → %s', (text, expected) => {
    expect(parseSessionDate(text)).toEqual({ ok: true, value: expected });
  });
  it.each([
    '2025-02-29', // not a leap year
    '1900-02-29', // century not divisible by 400
    '2025-02-30',
    '2025-04-31',
    '2025-13-01',
    '2025-00-10',
    '2025-3-4',
    '03/04/2025', // day/month or month/day: refused
    '2025/03/04',
    '32.01.2025',
    '2025-03-04T12:30:00', // a time of day is not a session date
    'yesterday',
    '45720', // an Excel serial number typed as text
  ])('%s is refused', (text) => {
    expect(parseSessionDate(text)).toMatchObject({ ok: false, code: 'invalid-date' });
  });
  it('says when a date looks like a spreadsheet date number', () => {
    expect(parseSessionDate('45720')).toMatchObject({ ok: false, message: expect.stringMatching(/spreadsheet date number/) });
  });
});

describe('spreadsheet-safe text', () => {
  it.each([
    ['=SUM(A1)', "'=SUM(A1)"],
    ['+1', "'+1"],
    ['-x', "'-x"],
    ['@cmd', "'@cmd"],
    ['\tx', "'\tx"],
    ['\rx', "'\rx"],
    ['plain', 'plain'],
    ["'=x", "''=x"], // already looks neutralised: protected again so the round trip is exact
    ["'plain", "'plain"],
    ['', ''],
  ])('%j → %j', (text, safe) => {
    expect(neutralizeFormulaText(text)).toBe(safe);
    expect(restoreFormulaText(safe)).toBe(text);
  });

  it('restore(neutralize(s)) === s, and neutralized text never starts with a formula character', () => {
    const alphabet = fc.constantFrom("'", '=', '+', '-', '@', '\t', '\r', 'a', ' ', '"');
    fc.assert(
      fc.property(fc.oneof(fc.string(), fc.string({ unit: alphabet, maxLength: 6 })), (s) => {
        const safe = neutralizeFormulaText(s);
        expect(restoreFormulaText(safe)).toBe(s);
        expect(/^[=+\-@\t\r]/.test(safe)).toBe(false);
      }),
      { numRuns: 500 },
    );
  });
});

describe('file kind, delimiter and header names', () => {
  it('detects kinds by magic bytes', () => {
    expect(detectFileKind(new Uint8Array([]))).toBe('empty');
    expect(detectFileKind(new Uint8Array([0x50, 0x4b, 0x03, 0x04]))).toBe('xlsx');
    expect(detectFileKind(new Uint8Array([0xd0, 0xcf, 0x11, 0xe0]))).toBe('xls');
    expect(detectFileKind(new Uint8Array([0x25, 0x50, 0x44, 0x46]))).toBe('binary');
    expect(detectFileKind(Buffer.from('session,date'))).toBe('csv');
    expect(detectFileKind(new Uint8Array([0xff, 0xfe, 0x73, 0x00]))).toBe('csv'); // UTF-16 LE text
  });

  it('detects the delimiter from the header line, ignoring quoted text', () => {
    expect(detectDelimiter('session;date;assessor\n')).toBe(';');
    expect(detectDelimiter('session,date,assessor\na;b;c;d;e\n')).toBe(',');
    expect(detectDelimiter('"a;b;c",d,e\n')).toBe(',');
    expect(detectDelimiter('session\tdate\tassessor')).toBe('\t');
    expect(detectDelimiter('session')).toBe(',');
  });

  it('normalises header names', () => {
    expect(normaliseHeaderName('  Session_Date ')).toBe('session date');
    expect(normaliseHeaderName('SAMPLE-CODE')).toBe('sample code');
  });
});
