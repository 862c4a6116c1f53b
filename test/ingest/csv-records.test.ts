/**
 * The CSV record source (ingest/csv-records.ts) streams text through papaparse and hands
 * malformed quoting to csv-parse. Checked against csv-parse itself (the reader the project
 * used before, with the same options): the same records for any text, cut into chunks at any
 * byte, and the same kind of failure where csv-parse refuses the text.
 */
import { parse } from 'csv-parse/sync';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { readCsvRecords, type SourceRecord } from '../../ingest/csv-records.js';
import { SourceFailure } from '../../ingest/source-failure.js';

const MAX_RECORD_CHARS = 1_000_000;

async function* chunked(bytes: Uint8Array, sizes: number[]): AsyncGenerator<Uint8Array> {
  let at = 0;
  for (let i = 0; at < bytes.length; i++) {
    const size = sizes.length === 0 ? bytes.length : Math.max(1, sizes[i % sizes.length]);
    yield bytes.subarray(at, at + size);
    at += size;
  }
}

type Outcome = { records: string[][]; rows: number[]; failure: string | null; failureRow: number | null };

async function readRecords(text: string, sizes: number[] = []): Promise<Outcome> {
  const records: string[][] = [];
  const rows: number[] = [];
  try {
    for await (const batch of readCsvRecords(chunked(new TextEncoder().encode(text), sizes), { maxRecordChars: MAX_RECORD_CHARS })) {
      for (const record of batch as SourceRecord[]) {
        records.push(record.cells);
        rows.push(record.row);
      }
    }
    return { records, rows, failure: null, failureRow: null };
  } catch (error) {
    if (!(error instanceof SourceFailure)) throw error;
    return { records, rows, failure: error.code, failureRow: error.row };
  }
}

/** csv-parse alone, with the options the reader used before papaparse (comma files). */
function csvParse(text: string): { records: string[][] } | { failure: true } {
  try {
    const records = parse(text, { delimiter: ',', skip_empty_lines: false, relax_column_count: true, relax_quotes: true, bom: true, max_record_size: MAX_RECORD_CHARS }) as string[][];
    return { records };
  } catch {
    return { failure: true };
  }
}

const HEADER = 'a,b,c';

/** One field written the way a spreadsheet export writes it: quoted when it must be. */
const field = fc
  .array(fc.constantFrom('x', 'Y', '1', ' ', ',', '"', '\n', '\r\n', 'é', '中', ';', '\t'), { maxLength: 6 })
  .map((parts) => parts.join(''))
  .map((s) => (/[",\r\n]/.test(s) || s.trim() !== s ? `"${s.replaceAll('"', '""')}"` : s));
const wellFormed = fc.record({
  lines: fc.array(fc.array(field, { minLength: 1, maxLength: 4 }).map((cells) => cells.join(',')), { maxLength: 12 }),
  eol: fc.constantFrom('\n', '\r\n'),
  finalEol: fc.boolean(),
  sizes: fc.array(fc.integer({ min: 1, max: 40 }), { maxLength: 5 }),
});
/**
 * Any text of CSV-ish characters, including broken quoting, with one kind of line break
 * (csv-parse itself reads mixed line breaks differently depending on where chunks end).
 */
const anyText = fc.record({
  body: fc.array(fc.constantFrom('x', '1', ',', '"', '""', '\n', ' ', '\t', '"x"y', '12" plate'), { maxLength: 40 }).map((parts) => parts.join('')),
  eol: fc.constantFrom('\n', '\r\n'),
  sizes: fc.array(fc.integer({ min: 1, max: 40 }), { maxLength: 5 }),
});

describe('CSV records (papaparse, csv-parse for malformed quoting)', () => {
  it('well-formed text cut into chunks anywhere gives the records csv-parse gives, numbered from 1', async () => {
    await fc.assert(
      fc.asyncProperty(wellFormed, async ({ lines, eol, finalEol, sizes }) => {
        const text = [HEADER, ...lines].join(eol) + (finalEol ? eol : '');
        const expected = csvParse(text);
        const got = await readRecords(text, sizes);
        expect(got.failure).toBeNull();
        expect(expected).toEqual({ records: got.records });
        expect(got.rows).toEqual(got.records.map((_, i) => i + 1));
      }),
      { numRuns: 300 },
    );
  });

  it('any text: the same records as csv-parse, or a whole-file failure where csv-parse fails', async () => {
    await fc.assert(
      fc.asyncProperty(anyText, async ({ body, eol, sizes }) => {
        const text = `${HEADER}\n${body}`.replaceAll('\n', eol);
        const expected = csvParse(text);
        const got = await readRecords(text, sizes);
        if ('failure' in expected) {
          expect(got.failure).not.toBeNull();
          expect(got.failureRow).toBeGreaterThanOrEqual(2);
        } else {
          expect(got.failure).toBeNull();
          expect(got.records).toEqual(expected.records);
        }
      }),
      { numRuns: 300 },
    );
  });

  it('a stray quote after thousands of rows is kept as text, with the row numbers unchanged', async () => {
    const rows = Array.from({ length: 5000 }, (_, i) => `r${i + 2},"q ${i}",z`);
    const text = `${HEADER}\r\n${rows.join('\r\n')}\r\n"a"b,12" plate,z\r\nlast,1,2\r\n`;
    const got = await readRecords(text, [65_536]);
    expect(got.failure).toBeNull();
    expect(got.records.length).toBe(5003);
    expect(got.records[5001]).toEqual(['"a"b', '12" plate', 'z']);
    expect(got.rows[5001]).toBe(5002);
    expect(got.records[5002]).toEqual(['last', '1', '2']);
  });

  it('an unclosed quote after thousands of rows names the row where it opens', async () => {
    const rows = Array.from({ length: 5000 }, (_, i) => `r${i + 2},"q ${i}",z`);
    const text = `${HEADER}\n${rows.join('\n')}\nS,"open,z\nmore,1,2\n`;
    const got = await readRecords(text, [4096]);
    expect(got.failure).toBe('file-unreadable');
    expect(got.failureRow).toBe(5002);
  });

  it('a quoted cell with line breaks across many chunks is one record', async () => {
    const cell = `${'word '.repeat(20_000)}\nline two\r\nline "three"`;
    const text = `${HEADER}\r\nbefore,1,2\r\n"${cell.replaceAll('"', '""')}",x,y\r\nafter,3,4\r\n`;
    const got = await readRecords(text, [1000]);
    expect(got.failure).toBeNull();
    expect(got.records).toEqual([['a', 'b', 'c'], ['before', '1', '2'], [cell, 'x', 'y'], ['after', '3', '4']]);
  });

  it('blank lines are records (spreadsheet row numbers); the final line break is not', async () => {
    const got = await readRecords(`${HEADER}\n\n1,2,3\n\n`);
    expect(got.records).toEqual([['a', 'b', 'c'], [''], ['1', '2', '3'], ['']]);
  });
});
