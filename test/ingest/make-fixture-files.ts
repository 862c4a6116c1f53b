/**
 * Writes the ingest test input files into test/fixtures/files/ (committed).
 * Run: npx tsx test/ingest/make-fixture-files.ts
 *
 * One small invented data set (2 sessions × 3 assessors × 2 products × 2 replicates ×
 * 3 attributes = 72 ratings, 1 of them missing in wide form) is written in every format the
 * reader accepts; the tests check that all of them read to the same ratings.
 */
import ExcelJS from 'exceljs';
import iconv from 'iconv-lite';
import { mkdirSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

const here = dirname(fileURLToPath(import.meta.url));
const outDir = join(here, '..', 'fixtures', 'files');

export interface FixtureRow {
  session: string;
  date: string;
  assessor: string;
  product: string;
  replicate: number;
  code: string;
  values: Record<string, number | null>;
}

export const FIXTURE_ATTRIBUTES = ['crunchy', 'salty', 'oily aftertaste'] as const;

/** Deterministic invented values: no randomness, so the files are stable. */
export function fixtureRows(): FixtureRow[] {
  const sessions = [
    { session: 'W01', date: '2025-03-04' },
    { session: 'W02', date: '2025-03-11' },
  ];
  // Names chosen to exercise escaping and formula neutralisation downstream.
  const assessors = ['A01', 'Zoë', '=SUM(A1)'];
  const products = ['Ref', '<script>alert(1)</script>'];
  const rows: FixtureRow[] = [];
  let k = 0;
  for (const s of sessions) {
    for (const assessor of assessors) {
      for (const [p, product] of products.entries()) {
        for (const replicate of [1, 2]) {
          const values: Record<string, number | null> = {};
          FIXTURE_ATTRIBUTES.forEach((attribute, a) => {
            values[attribute] = Math.round(((k * 37 + a * 11) % 97) + 3) / 10;
          });
          k++;
          rows.push({ ...s, assessor, product, replicate, code: String(100 + p * 7 + replicate * 13 + k), values });
        }
      }
    }
  }
  // One missing rating, to check wide-form empty cells.
  rows[5].values['salty'] = null;
  return rows;
}

/** Spreadsheet-safe text as an export writes it. */
function safe(text: string): string {
  return /^[=+\-@\t\r]/.test(text) ? "'" + text : text;
}

function quote(cell: string, delimiter: string): string {
  return cell.includes(delimiter) || cell.includes('"') || cell.includes('\n') ? `"${cell.replace(/"/g, '""')}"` : cell;
}

function formatNumber(value: number, decimalComma: boolean): string {
  return decimalComma ? String(value).replace('.', ',') : String(value);
}

export function longCsv(opts: { delimiter: string; decimalComma: boolean; eol: string; headers?: string[]; dottedDates?: boolean }): string {
  const headers = opts.headers ?? ['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value', 'code'];
  const lines = [headers.map((h) => quote(h, opts.delimiter)).join(opts.delimiter)];
  for (const r of fixtureRows()) {
    for (const attribute of FIXTURE_ATTRIBUTES) {
      const value = r.values[attribute];
      if (value === null) continue;
      const date = opts.dottedDates ? r.date.split('-').reverse().join('.') : r.date;
      const cells = [r.session, date, safe(r.assessor), safe(r.product), String(r.replicate), attribute, formatNumber(value, opts.decimalComma), r.code];
      lines.push(cells.map((c) => quote(c, opts.delimiter)).join(opts.delimiter));
    }
  }
  return lines.join(opts.eol) + opts.eol;
}

export function wideCsv(opts: { delimiter: string; decimalComma: boolean; eol: string; headers?: string[] }): string {
  const headers = opts.headers ?? ['session', 'date', 'assessor', 'product', 'replicate', 'code', ...FIXTURE_ATTRIBUTES];
  const lines = [headers.map((h) => quote(h, opts.delimiter)).join(opts.delimiter)];
  for (const r of fixtureRows()) {
    const values = FIXTURE_ATTRIBUTES.map((a) => (r.values[a] === null ? '' : formatNumber(r.values[a]!, opts.decimalComma)));
    const cells = [r.session, r.date, safe(r.assessor), safe(r.product), String(r.replicate), r.code, ...values];
    lines.push(cells.map((c) => quote(c, opts.delimiter)).join(opts.delimiter));
  }
  return lines.join(opts.eol) + opts.eol;
}

async function wideXlsx(path: string): Promise<void> {
  const workbook = new ExcelJS.Workbook();
  // A decoy first sheet for --sheet tests lives in a separate workbook; this one has the data first.
  const sheet = workbook.addWorksheet('Ratings');
  sheet.addRow(['Session', 'Session date', 'Panelist', 'Sample', 'Rep', 'Blind code', ...FIXTURE_ATTRIBUTES]);
  for (const r of fixtureRows()) {
    const [y, m, d] = r.date.split('-').map(Number);
    const row = sheet.addRow([
      r.session,
      new Date(Date.UTC(y, m - 1, d)),
      r.assessor,
      r.product,
      r.replicate,
      r.code,
      ...FIXTURE_ATTRIBUTES.map((a) => r.values[a]),
    ]);
    row.getCell(2).numFmt = 'yyyy-mm-dd';
  }
  // A formula whose cached result is the value: the reader must use the result.
  const first = sheet.getRow(2);
  const crunchy = fixtureRows()[0].values['crunchy']!;
  first.getCell(7).value = { formula: `${crunchy * 2}/2`, result: crunchy };
  await workbook.xlsx.writeFile(path);
}

async function twoSheetXlsx(path: string): Promise<void> {
  const workbook = new ExcelJS.Workbook();
  const notes = workbook.addWorksheet('Notes');
  notes.addRow(['This sheet is not ratings']);
  const sheet = workbook.addWorksheet('Week 12');
  sheet.addRow(['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value', 'code']);
  for (const r of fixtureRows()) {
    for (const attribute of FIXTURE_ATTRIBUTES) {
      const value = r.values[attribute];
      if (value === null) continue;
      // Dates as text here (a sheet typed by hand), values as numbers.
      sheet.addRow([r.session, r.date, r.assessor, r.product, r.replicate, attribute, value, r.code]);
    }
  }
  await workbook.xlsx.writeFile(path);
}

async function badCellsXlsx(path: string): Promise<void> {
  const workbook = new ExcelJS.Workbook();
  const sheet = workbook.addWorksheet('Bad');
  sheet.addRow(['session', 'date', 'assessor', 'product', 'replicate', 'crunchy']);
  sheet.addRow(['W01', '2025-03-04', 'A01', 'Ref', 1, 5.5]);
  sheet.addRow(['W01', '2025-03-04', 'A01', 'Ref', 1.5, 5.5]); // row 3: fractional replicate
  sheet.addRow(['W01', '2025-03-04', 'A01', 'Ref', 2, { error: '#DIV/0!' }]); // row 4: error cell
  sheet.addRow(['W01', '2025-03-04', 'A01', 'Ref', 3, 73]); // row 5: decimal shift on 0–10
  await workbook.xlsx.writeFile(path);
}

export async function writeFixtureFiles(): Promise<void> {
  mkdirSync(outDir, { recursive: true });
  const write = (name: string, data: string | Uint8Array): void => writeFileSync(join(outDir, name), data);
  write('long-comma-lf.csv', longCsv({ delimiter: ',', decimalComma: false, eol: '\n' }));
  write('long-semicolon-decimal-comma-crlf.csv', longCsv({ delimiter: ';', decimalComma: true, eol: '\r\n', dottedDates: true }));
  write('long-comma-quoted-decimal-comma.csv', longCsv({ delimiter: ',', decimalComma: true, eol: '\n' }));
  write('long-tab.tsv', longCsv({ delimiter: '\t', decimalComma: false, eol: '\n' }));
  write('long-utf8-bom.csv', '\uFEFF' + longCsv({ delimiter: ',', decimalComma: false, eol: '\r\n' }));
  write('long-utf16le-bom.csv', iconv.encode(longCsv({ delimiter: ';', decimalComma: true, eol: '\r\n' }), 'utf-16le', { addBOM: true }));
  write('long-utf16be-bom.csv', iconv.encode(longCsv({ delimiter: ',', decimalComma: false, eol: '\n' }), 'utf-16be', { addBOM: true }));
  write(
    'long-synonyms.csv',
    longCsv({
      delimiter: ',',
      decimalComma: false,
      eol: '\n',
      headers: [' Session ID', 'SESSION_DATE', 'Panellist', 'Product code', 'Repetition', 'Descriptor', 'Intensity', 'Sample code'],
    }),
  );
  write('wide-comma-lf.csv', wideCsv({ delimiter: ',', decimalComma: false, eol: '\n' }));
  write('wide-semicolon-bom-crlf.csv', '\uFEFF' + wideCsv({ delimiter: ';', decimalComma: true, eol: '\r\n' }));
  write(
    'wide-synonyms.csv',
    wideCsv({ delimiter: ',', decimalComma: false, eol: '\n', headers: ['session', 'date', 'Judge', 'Sample', 'rep', 'Blind code', ...FIXTURE_ATTRIBUTES] }),
  );
  write('long-latin1.csv', iconv.encode(longCsv({ delimiter: ',', decimalComma: false, eol: '\n' }), 'latin1'));
  write('long-utf16le-no-bom.csv', iconv.encode(longCsv({ delimiter: ',', decimalComma: false, eol: '\n' }), 'utf-16le', { addBOM: false }));
  await wideXlsx(join(outDir, 'wide.xlsx'));
  await twoSheetXlsx(join(outDir, 'long-two-sheets.xlsx'));
  await badCellsXlsx(join(outDir, 'wide-bad-cells.xlsx'));
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  await writeFixtureFiles();
  console.log(`wrote fixture files to ${outDir}`);
}
