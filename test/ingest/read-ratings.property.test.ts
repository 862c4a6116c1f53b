/**
 * Property and mutation tests of the reader (bad input: clear problems, never a crash):
 * - valid generated data, written by csv-stringify / exceljs in every accepted format,
 *   reads back to exactly the ratings written;
 * - long and wide forms of the same data give identical rating streams;
 * - mutated files (truncation, binary junk, wrong encodings, unbalanced quotes, mixed
 *   delimiters, extra fields, duplicate headers, NaN/Infinity/1e999, bad replicates,
 *   impossible dates, formula-like cells, HTML) never throw: every outcome is ratings,
 *   missing cells, findings and/or problems, each problem naming the file and, for a cell,
 *   its row and column.
 * Runs are bounded (a few hundred cases in all) to keep the suite fast.
 */
import { stringify } from 'csv-stringify/sync';
import ExcelJS from 'exceljs';
import fc from 'fast-check';
import iconv from 'iconv-lite';
import { describe, expect, it } from 'vitest';
import type { Rating } from '../../domain/ratings.js';
import { HEADER_SYNONYMS, normaliseHeaderName } from '../../ingest/headers.js';
import { checkName } from '../../ingest/names.js';
import { UNEXPECTED_READ_FAILURE } from '../../ingest/read-ratings.js';
import { neutralizeFormulaText } from '../../ingest/spreadsheet-safe.js';
import { readAll, SCALE_0_10, type ReadResult } from './helpers.js';

const KNOWN_HEADERS = new Set(Object.values(HEADER_SYNONYMS).flat());

const nameChar = fc.constantFrom(
  ...'abcXYZ019 ,;"\'=+-@<>/&é中😀\t\n'.split(/(?:)/u),
  '<script>alert(1)</script>',
  '=HYPERLINK("x")',
);
/** Identifiers as people type them: no surrounding white space, never empty. */
const identifier = fc
  .array(nameChar, { minLength: 1, maxLength: 6 })
  .map((parts) => parts.join(''))
  .filter((s) => s.trim() === s && s !== '');
/** Names (session, assessor, product, attribute): identifiers the name rules accept (no tab or line break, not punctuation only). */
const name = identifier.filter((s) => checkName(s, 'name').ok);

const dateText = fc
  .integer({ min: Date.UTC(1990, 0, 1), max: Date.UTC(2090, 11, 31) })
  .map((ms) => new Date(ms).toISOString().slice(0, 10));

interface DataRow {
  session: string;
  date: string;
  assessor: string;
  product: string;
  replicate: number;
  code: string | null;
  values: (number | null)[];
}

interface DataSet {
  attributes: string[];
  rows: DataRow[];
  withCode: boolean;
}

const dataSet: fc.Arbitrary<DataSet> = fc
  .record({
    attributes: fc.uniqueArray(name, { minLength: 1, maxLength: 4, selector: normaliseHeaderName }),
    withCode: fc.boolean(),
    nRows: fc.integer({ min: 1, max: 8 }),
    seedRows: fc.array(
      fc.record({
        session: name,
        date: dateText,
        assessor: name,
        product: name,
        replicate: fc.integer({ min: 1, max: 12 }),
        code: identifier,
        values: fc.array(fc.option(fc.integer({ min: 0, max: 1000 }).map((n) => n / 100), { freq: 6 }), { minLength: 4, maxLength: 4 }),
      }),
      { minLength: 8, maxLength: 8 },
    ),
  })
  .filter((d) => d.attributes.every((a) => !KNOWN_HEADERS.has(normaliseHeaderName(a))))
  .map((d) => ({
    attributes: d.attributes,
    withCode: d.withCode,
    rows: d.seedRows.slice(0, d.nRows).map((r) => ({ ...r, code: d.withCode ? r.code : null, values: r.values.slice(0, d.attributes.length) })),
  }))
  // A long-form file needs at least one rating (else it is header-only, a problem).
  .filter((d) => d.rows.some((r) => r.values.some((v) => v !== null)));

/** The ratings a data set holds, in the order both forms list them (row, then attribute). */
function expectedRatings(data: DataSet): Rating[] {
  return data.rows.flatMap((r) =>
    data.attributes.flatMap((attribute, a) =>
      r.values[a] === null
        ? []
        : [{ session: r.session, assessor: r.assessor, product: r.product, replicate: r.replicate, attribute, value: r.values[a]!, date: r.date, code: r.code }],
    ),
  );
}

interface Encoding {
  delimiter: ',' | ';';
  eol: 'unix' | 'windows';
  bom: boolean;
  charset: 'utf-8' | 'utf-16le' | 'utf-16be';
}
const encodingArb: fc.Arbitrary<Encoding> = fc.record({
  delimiter: fc.constantFrom(',' as const, ';' as const),
  eol: fc.constantFrom('unix' as const, 'windows' as const),
  bom: fc.boolean(),
  charset: fc.constantFrom('utf-8' as const, 'utf-8' as const, 'utf-16le' as const, 'utf-16be' as const),
});

function numberText(value: number, enc: Encoding): string {
  return enc.delimiter === ';' ? String(value).replace('.', ',') : String(value);
}

function toCsvText(data: DataSet, form: 'long' | 'wide', enc: Encoding): string {
  const safe = neutralizeFormulaText;
  const records: string[][] = [];
  if (form === 'long') {
    records.push(['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value', ...(data.withCode ? ['code'] : [])]);
    for (const r of expectedRatings(data)) {
      records.push([safe(r.session), r.date, safe(r.assessor), safe(r.product), String(r.replicate), safe(r.attribute), numberText(r.value, enc), ...(data.withCode ? [safe(r.code!)] : [])]);
    }
  } else {
    records.push(['session', 'date', 'assessor', 'product', 'replicate', ...(data.withCode ? ['code'] : []), ...data.attributes.map(safe)]);
    for (const r of data.rows) {
      records.push([
        safe(r.session),
        r.date,
        safe(r.assessor),
        safe(r.product),
        String(r.replicate),
        ...(data.withCode ? [safe(r.code!)] : []),
        ...r.values.map((v) => (v === null ? '' : numberText(v, enc))),
      ]);
    }
  }
  // csv-stringify quotes only the chosen record delimiter; spreadsheets quote any line break.
  return stringify(records, { delimiter: enc.delimiter, record_delimiter: enc.eol, quoted_match: /[\r\n]/ });
}

function encode(text: string, enc: Encoding): Uint8Array {
  if (enc.charset === 'utf-8') return Buffer.from((enc.bom ? '\uFEFF' : '') + text, 'utf8');
  return iconv.encode(text, enc.charset, { addBOM: true });
}

async function toXlsxBytes(data: DataSet): Promise<Uint8Array> {
  const workbook = new ExcelJS.Workbook();
  const sheet = workbook.addWorksheet('Ratings');
  sheet.addRow(['session', 'date', 'assessor', 'product', 'replicate', ...(data.withCode ? ['code'] : []), ...data.attributes]);
  for (const r of data.rows) sheet.addRow([r.session, r.date, r.assessor, r.product, r.replicate, ...(data.withCode ? [r.code] : []), ...r.values]);
  return new Uint8Array(await workbook.xlsx.writeBuffer());
}

describe('valid data round-trips', () => {
  it('CSV long and wide, any delimiter, line end, BOM and encoding, read back exactly what was written', async () => {
    await fc.assert(
      fc.asyncProperty(dataSet, encodingArb, encodingArb, async (data, encLong, encWide) => {
        const expected = expectedRatings(data);
        const long = await readAll({ bytes: encode(toCsvText(data, 'long', encLong), encLong) }, { fileName: 'long.csv' });
        const wide = await readAll({ bytes: encode(toCsvText(data, 'wide', encWide), encWide) }, { fileName: 'wide.csv' });
        expect(long.problems).toEqual([]);
        expect(wide.problems).toEqual([]);
        expect(long.ratings).toEqual(expected);
        // Long and wide forms of the same data: identical rating streams.
        expect(wide.ratings).toEqual(long.ratings);
        expect(wide.missing).toHaveLength(data.rows.length * data.attributes.length - expected.length);
      }),
      { numRuns: 150 },
    );
  });

  it('xlsx wide form reads back what exceljs wrote', async () => {
    await fc.assert(
      fc.asyncProperty(dataSet, async (data) => {
        const r = await readAll({ bytes: await toXlsxBytes(data) }, { fileName: 'wide.xlsx' });
        expect(r.problems).toEqual([]);
        expect(r.ratings).toEqual(expectedRatings(data));
      }),
      { numRuns: 25 },
    );
  });
});

// ---- mutations ------------------------------------------------------------------------

const hostileCell = fc.constantFrom(
  'NaN',
  'Infinity',
  '-Infinity',
  '1e999',
  '-1',
  '0',
  '1.5',
  '2a',
  '2025-02-30',
  '31/12/2025',
  '=cmd|" /C calc"!A0',
  '+1',
  '@SUM(1)',
  '<script>alert(1)</script>',
  '"',
  '""',
  '"unclosed',
  'a"b',
  ';',
  ',',
  '\u0000',
  '\uFFFD',
  '',
  ' ',
  '1,500',
  '1.234,5',
  'x'.repeat(12_000),
);

type Mutation =
  | { kind: 'truncate'; at: number }
  | { kind: 'junk'; at: number; bytes: Uint8Array }
  | { kind: 'flip'; at: number; byte: number }
  | { kind: 'cell'; line: number; field: number; text: string }
  | { kind: 'extra-field'; line: number }
  | { kind: 'drop-field'; line: number }
  | { kind: 'swap-delimiter'; line: number }
  | { kind: 'duplicate-header' }
  | { kind: 'latin1' }
  | { kind: 'utf16-no-bom' }
  | { kind: 'empty' };

const mutationArb: fc.Arbitrary<Mutation> = fc.oneof(
  fc.record({ kind: fc.constant('truncate' as const), at: fc.nat() }),
  fc.record({ kind: fc.constant('junk' as const), at: fc.nat(), bytes: fc.uint8Array({ minLength: 1, maxLength: 40 }) }),
  fc.record({ kind: fc.constant('flip' as const), at: fc.nat(), byte: fc.integer({ min: 0, max: 255 }) }),
  fc.record({ kind: fc.constant('cell' as const), line: fc.nat(), field: fc.nat(), text: hostileCell }),
  fc.record({ kind: fc.constant('extra-field' as const), line: fc.nat() }),
  fc.record({ kind: fc.constant('drop-field' as const), line: fc.nat() }),
  fc.record({ kind: fc.constant('swap-delimiter' as const), line: fc.nat() }),
  fc.constant({ kind: 'duplicate-header' as const }),
  fc.constant({ kind: 'latin1' as const }),
  fc.constant({ kind: 'utf16-no-bom' as const }),
  fc.constant({ kind: 'empty' as const }),
);

/** Apply text-level mutations to lines (fields split naively: mutations need not be well-formed). */
function mutateText(text: string, delimiter: string, m: Mutation): string {
  const lines = text.split(/\r?\n/);
  const pick = (n: number): number => n % Math.max(1, lines.length);
  switch (m.kind) {
    case 'cell': {
      const i = pick(m.line);
      const fields = lines[i].split(delimiter);
      fields[m.field % fields.length] = m.text;
      lines[i] = fields.join(delimiter);
      return lines.join('\n');
    }
    case 'extra-field':
      lines[pick(m.line)] += `${delimiter}extra`;
      return lines.join('\n');
    case 'drop-field': {
      const i = pick(m.line);
      lines[i] = lines[i].split(delimiter).slice(0, -1).join(delimiter);
      return lines.join('\n');
    }
    case 'swap-delimiter': {
      const i = pick(m.line);
      lines[i] = lines[i].split(delimiter).join(delimiter === ',' ? ';' : ',');
      return lines.join('\n');
    }
    case 'duplicate-header':
      lines[0] += `${delimiter}${lines[0].split(delimiter)[2] ?? 'assessor'}`;
      return lines.join('\n');
    default:
      return text;
  }
}

function mutateBytes(bytes: Uint8Array, text: string, m: Mutation): Uint8Array {
  switch (m.kind) {
    case 'truncate':
      return bytes.subarray(0, m.at % (bytes.length + 1));
    case 'junk': {
      const at = m.at % (bytes.length + 1);
      return Buffer.concat([bytes.subarray(0, at), m.bytes, bytes.subarray(at)]);
    }
    case 'flip': {
      const copy = new Uint8Array(bytes);
      if (copy.length > 0) copy[m.at % copy.length] = m.byte;
      return copy;
    }
    case 'latin1':
      return iconv.encode(text, 'latin1');
    case 'utf16-no-bom':
      return iconv.encode(text, 'utf-16le', { addBOM: false });
    case 'empty':
      return new Uint8Array(0);
    default:
      return bytes;
  }
}

/** What every outcome must satisfy, whatever the input. */
function checkOutcome(r: ReadResult, fileName: string): void {
  expect(r.events.length).toBeGreaterThan(0);
  for (const p of r.problems) {
    expect(p.file).toBe(fileName);
    expect(p.message.length).toBeGreaterThan(0);
    expect(p.message).not.toBe(UNEXPECTED_READ_FAILURE);
    expect(p.row === null || (Number.isInteger(p.row) && p.row >= 1)).toBe(true);
    if (p.value !== undefined && p.value !== null) expect(p.value.length).toBeLessThanOrEqual(80);
  }
  for (const e of r.problemEvents) {
    if (e.cell !== null) {
      expect(e.problem.row).toBeGreaterThanOrEqual(2);
      expect(e.problem.column).not.toBeNull();
    }
  }
  for (const e of r.ratingEvents) {
    expect(Number.isInteger(e.row) && e.row >= 2).toBe(true);
    const x = e.rating;
    expect(Number.isFinite(x.value) && x.value >= SCALE_0_10.min && x.value <= SCALE_0_10.max).toBe(true);
    expect(Number.isInteger(x.replicate) && x.replicate >= 1).toBe(true);
    expect(x.date).toMatch(/^\d{4}-\d{2}-\d{2}$/);
    expect(x.session !== '' && x.assessor !== '' && x.product !== '' && x.attribute !== '').toBe(true);
  }
  // A rejected value cell is handed over once, never also as a rating.
  const ratingCells = new Set(r.ratingEvents.map((e) => `${e.row}\u0001${e.column}`));
  for (const e of r.problemEvents) if (e.cell !== null) expect(ratingCells.has(`${e.problem.row}\u0001${e.problem.column}`)).toBe(false);
}

describe('mutated input never crashes the reader', () => {
  it('CSV: every outcome is events with file and row set, no unexpected failure', async () => {
    await fc.assert(
      fc.asyncProperty(dataSet, encodingArb, fc.constantFrom('long' as const, 'wide' as const), fc.array(mutationArb, { minLength: 1, maxLength: 3 }), async (data, enc, form, mutations) => {
        let text = toCsvText(data, form, enc);
        let bytes = encode(text, enc);
        for (const m of mutations) {
          text = mutateText(text, enc.delimiter, m);
          bytes = m.kind === 'cell' || m.kind === 'extra-field' || m.kind === 'drop-field' || m.kind === 'swap-delimiter' || m.kind === 'duplicate-header' ? encode(text, enc) : mutateBytes(bytes, text, m);
        }
        checkOutcome(await readAll({ bytes }, { fileName: 'mutated.csv' }), 'mutated.csv');
      }),
      { numRuns: 250 },
    );
  });

  it('xlsx: truncated or corrupted workbooks give a clear problem', async () => {
    await fc.assert(
      fc.asyncProperty(dataSet, fc.oneof(mutationArb.filter((m) => m.kind === 'truncate' || m.kind === 'junk' || m.kind === 'flip')), async (data, m) => {
        const bytes = mutateBytes(await toXlsxBytes(data), '', m);
        checkOutcome(await readAll({ bytes }, { fileName: 'mutated.xlsx', stallTimeoutMs: 300 }), 'mutated.xlsx');
      }),
      { numRuns: 25 },
    );
  });

  it('arbitrary bytes', async () => {
    await fc.assert(
      fc.asyncProperty(fc.uint8Array({ maxLength: 300 }), async (bytes) => {
        checkOutcome(await readAll({ bytes }, { fileName: 'junk.bin' }), 'junk.bin');
      }),
      { numRuns: 150 },
    );
  });
});
