/**
 * CSV formula injection: every CSV the tool writes goes through ingest/csv-writer.ts. A cell
 * holding a line break followed by a formula (the attack run's `x⏎=cmd|' /C calc'!A0`) must be
 * quoted, no line of the file may begin with a formula character, a CSV parser must read the
 * cell back whole, and the importer must read back exactly what was stored.
 */
import { PassThrough } from 'node:stream';
import { parse } from 'csv-parse/sync';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { csvRecord, csvRecords, type CsvValue } from '../../ingest/csv-writer.js';
import { neutralizeFormulaText, restoreFormulaText } from '../../ingest/spreadsheet-safe.js';
import { exportRatings } from '../../store/export-ratings.js';
import { freshApps, postCsv } from '../http/http-helpers.js';
import { readText } from '../ingest/helpers.js';

const PAYLOAD = "x\n=cmd|' /C calc'!A0";
const FORMULA_START = /^[=+\-@\t]/;

/** The lines of a file as a line-based reader sees them (any of CRLF, LF, CR ends a line). */
function lines(text: string): string[] {
  return text.split(/\r\n|\n|\r/);
}

/**
 * A line that begins a record may start with the opening quote of its first field. A negative
 * number (written only for number values, never for text) is a number to a spreadsheet too.
 */
function startsWithFormula(line: string): boolean {
  if (/^-\d[\d.e+-]*(?:[,;]|$)/.test(line)) return false;
  return FORMULA_START.test(line) || FORMULA_START.test(line.replace(/^"/, ''));
}

function expectNoFormulaLine(text: string): void {
  for (const line of lines(text)) expect(startsWithFormula(line), JSON.stringify(line)).toBe(false);
}

describe('the attack payload', () => {
  const fresh = freshApps();

  it('is quoted and neutralised on every line, in the page download and in the export', async () => {
    const { app, db } = await fresh();
    const csv = csvRecords(
      [
        ['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value'],
        ['W01', '2026-01-05', PAYLOAD, 'P1', 1, 'sweet', 4],
        ['W01', '2026-01-05', PAYLOAD, 'P2', 1, 'sweet', 6],
        ['W01', '2026-01-05', 'A02', 'P1', 1, 'sweet', 5],
        ['W01', '2026-01-05', 'A02', 'P2', 1, 'sweet', 7],
      ],
      { recordDelimiter: '\n' },
    );
    const imported = await postCsv(app, 'oat', csv);
    if (imported.statusCode !== 200) {
      // Should names with line breaks be refused at import, the cell can still be in a store an
      // older version filled: put it there directly, the downloads must be safe either way.
      expect(imported.statusCode, imported.body).toBe(422);
      expect(JSON.stringify(imported.json())).toContain('assessor');
      expect((await postCsv(app, 'oat', csv.replaceAll(`"${neutralizeFormulaText(PAYLOAD)}"`, 'A01'))).statusCode).toBe(200);
      db.prepare('UPDATE assessor SET code = ? WHERE code = ?').run(PAYLOAD, 'A01');
    }

    const download = await app.inject({ url: '/panels/oat/sessions/W01.csv' });
    expect(download.statusCode).toBe(200);
    expect(download.body).toContain(`"x\n'=cmd|' /C calc'!A0"`);
    expectNoFormulaLine(download.body);
    const parsed = parse(download.body, { columns: true }) as Record<string, string>[];
    expect(parsed.filter((row) => restoreFormulaText(row.assessor) === PAYLOAD)).toHaveLength(2);

    const out = new PassThrough();
    const chunks: Buffer[] = [];
    out.on('data', (chunk: Buffer) => chunks.push(chunk));
    await exportRatings(db, { panel: 'oat', format: 'csv' }, out);
    const exported = Buffer.concat(chunks).toString('utf8');
    expect(exported).toContain(`"x\n'=cmd|' /C calc'!A0"`);
    expectNoFormulaLine(exported);

    // The download imports back to the same names (or, where such names are refused at import,
    // is refused naming the column: never stored as something else).
    const again = await postCsv(app, 'copy', download.body);
    if (again.statusCode === 422) {
      expect(JSON.stringify(again.json())).toContain('assessor');
      return;
    }
    expect(again.statusCode).toBe(200);
    const original = (await app.inject({ url: '/panels/oat/sessions/W01.json' })).json();
    const copy = (await app.inject({ url: '/panels/copy/sessions/W01.json' })).json();
    expect(copy.attributes).toEqual(original.attributes);
    expect(JSON.stringify(copy)).toContain(JSON.stringify(PAYLOAD).slice(1, -1));
  });

  it('is read back by the importer as the stored name', async () => {
    const text = csvRecords([
      ['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value'],
      ['W01', '2026-01-05', PAYLOAD, 'P1', 1, 'sweet', 4],
    ]);
    const { ratings, problems } = await readText(text);
    if (problems.length > 0) {
      // Refused (names with control characters may be): at its row and column, nothing read.
      expect(problems.map((p) => [p.row, p.column])).toEqual([[2, 'assessor']]);
      expect(ratings).toEqual([]);
      return;
    }
    expect(ratings[0].assessor).toBe(PAYLOAD);
  });
});

/** Text fields rich in what matters here: quotes, delimiters, line breaks, formula characters, apostrophes. */
const tricky = fc.string({
  unit: fc.constantFrom('"', ',', ';', '\r', '\n', '=', '+', '-', '@', '\t', "'", ' ', 'a', 'Z', '1', 'é', '|', '!'),
  maxLength: 12,
});
const anyText = fc.oneof(tricky, fc.string({ maxLength: 12 }), fc.constant(PAYLOAD));
const fieldArb: fc.Arbitrary<CsvValue> = fc.oneof(
  { weight: 6, arbitrary: anyText },
  { weight: 1, arbitrary: fc.double({ noNaN: true, noDefaultInfinity: true }) },
  { weight: 1, arbitrary: fc.constant(null) },
);

describe('the CSV writer (fast-check)', () => {
  it('quotes every field with a quote, delimiter, CR or LF; csv-parse reads every field back', () => {
    fc.assert(
      fc.property(
        fc.array(fc.array(fieldArb, { minLength: 1, maxLength: 5 }), { minLength: 1, maxLength: 5 }),
        fc.constantFrom(',' as const, ';' as const),
        fc.constantFrom('\r\n' as const, '\n' as const),
        (records, delimiter, recordDelimiter) => {
          const width = records[0].length;
          const rows = records.map((r) => Array.from({ length: width }, (_, i) => r[i] ?? null));
          const text = csvRecords(rows, { delimiter, recordDelimiter });
          expectNoFormulaLine(text);
          const parsed = parse(text, { delimiter, record_delimiter: recordDelimiter, relax_column_count: false }) as string[][];
          expect(parsed).toHaveLength(rows.length);
          rows.forEach((row, r) =>
            row.forEach((value, c) => {
              const expected = value === null ? '' : typeof value === 'number' ? (Object.is(value, -0) ? '0' : String(value)) : value;
              expect(typeof value === 'number' ? parsed[r][c] : restoreFormulaText(parsed[r][c])).toBe(expected);
            }),
          );
        },
      ),
      { numRuns: 600 },
    );
  });

  it('neutralises per line: restore(neutralize(s)) === s and no line of the result starts a formula', () => {
    fc.assert(
      fc.property(anyText, (s) => {
        const safe = neutralizeFormulaText(s);
        expect(restoreFormulaText(safe)).toBe(s);
        for (const line of safe.split(/\r|\n/)) expect(FORMULA_START.test(line), JSON.stringify(safe)).toBe(false);
      }),
      { numRuns: 2000 },
    );
  });

  it('writes a field that needs no quoting as is (byte-compatible with earlier exports)', () => {
    expect(csvRecord(['W01', '2026-01-05', 'A01', 'P1', 1, 'sweet', 7.25, null], { recordDelimiter: '\n' })).toBe('W01,2026-01-05,A01,P1,1,sweet,7.25,\n');
    expect(csvRecord([-0, -1.5, '-1.5'])).toBe("0,-1.5,'-1.5\r\n");
  });
});

/** A name the importer keeps as it is: not empty, no surrounding whitespace (cells are trimmed). */
const nameArb = (alphabet: fc.Arbitrary<string>) =>
  fc
    .string({ unit: alphabet, minLength: 1, maxLength: 10 })
    .map((s) => `N${s}`.trim())
    .filter((s) => s.length > 0);

const printable = fc.constantFrom('"', ',', ';', '=', '+', '-', '@', "'", ' ', 'a', 'Z', '1', 'é', '|', '!', '(', ')');
const withBreaks = fc.constantFrom('\n', '\r', '\r\n', '=', '+', '-', '@', "'", 'a', ' ', '"', ',');

describe('the importer reads back what the writer wrote (fast-check)', () => {
  it('names with quotes, delimiters, apostrophes and formula characters come back exactly', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.array(fc.tuple(nameArb(printable), nameArb(printable), nameArb(printable)), { minLength: 1, maxLength: 6 }),
        fc.constantFrom('\r\n' as const, '\n' as const),
        async (names, recordDelimiter) => {
          const records: CsvValue[][] = [['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value']];
          names.forEach(([assessor, product, attribute], i) => records.push(['W01', '2026-01-05', assessor, product, i + 1, attribute, 5]));
          const { ratings, problems } = await readText(csvRecords(records, { recordDelimiter }));
          expect(problems).toEqual([]);
          expect(ratings.map((r) => [r.assessor, r.product, r.attribute])).toEqual(names);
        },
      ),
      { numRuns: 150 },
    );
  });

  it('names with line breaks come back exactly, or are refused with their row and column (never changed)', async () => {
    await fc.assert(
      fc.asyncProperty(fc.array(nameArb(withBreaks), { minLength: 1, maxLength: 6 }), async (assessors) => {
        const records: CsvValue[][] = [['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value']];
        assessors.forEach((assessor, i) => records.push(['W01', '2026-01-05', assessor, 'P1', i + 1, 'sweet', 5]));
        const { ratings, problems } = await readText(csvRecords(records));
        for (const problem of problems) {
          expect(problem.row).not.toBeNull();
          expect(problem.column).toBe('assessor');
        }
        const refusedRows = new Set(problems.map((p) => p.row));
        const kept = assessors.filter((_, i) => !refusedRows.has(i + 2));
        expect(ratings.map((r) => r.assessor)).toEqual(kept);
      }),
      { numRuns: 150 },
    );
  });
});
