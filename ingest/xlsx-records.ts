import ExcelJS from 'exceljs';
import type { Readable } from 'node:stream';
import type { SourceRecord } from './csv-records.js';
import { SourceFailure } from './source-failure.js';

export interface XlsxRecordOptions {
  /** Sheet to read, by name (compared trimmed, case-insensitively); the first sheet when absent. */
  sheet?: string;
}

function pad2(n: number): string {
  return n < 10 ? '0' + n : String(n);
}

/**
 * Cell text as the rest of ingest reads it: numbers in JavaScript's shortest round-trip
 * form, date-formatted cells as YYYY-MM-DD (Excel dates have no time zone; exceljs returns
 * them as UTC midnight), formulas as their cached result, rich text and hyperlinks as text.
 */
export function xlsxCellText(value: unknown): string {
  if (value === null || value === undefined) return '';
  if (typeof value === 'string') return value;
  if (typeof value === 'number') return String(value);
  if (typeof value === 'boolean') return value ? 'TRUE' : 'FALSE';
  if (value instanceof Date) {
    const time = value.getTime();
    if (Number.isNaN(time)) return '';
    return `${value.getUTCFullYear()}-${pad2(value.getUTCMonth() + 1)}-${pad2(value.getUTCDate())}`;
  }
  if (typeof value === 'object') {
    const v = value as Record<string, unknown>;
    if ('result' in v) return xlsxCellText(v.result);
    if ('formula' in v || 'sharedFormula' in v) return '';
    if (Array.isArray(v.richText)) return (v.richText as { text?: unknown }[]).map((part) => String(part.text ?? '')).join('');
    if ('text' in v) return xlsxCellText(v.text);
    if ('error' in v) return String(v.error);
  }
  return String(value);
}

/**
 * Stream the rows of one worksheet of an .xlsx workbook with exceljs's streaming reader.
 * Row numbers are the sheet's own (header = the first non-empty row); missing rows are
 * skipped, as a spreadsheet shows them empty. Throws SourceFailure('sheet-missing') when
 * the named sheet is absent and 'file-unreadable' for a damaged workbook.
 */
export async function* readXlsxRecords(input: Readable, options: XlsxRecordOptions): AsyncGenerator<SourceRecord> {
  const reader = new ExcelJS.stream.xlsx.WorkbookReader(input, {
    worksheets: 'emit',
    sharedStrings: 'cache',
    hyperlinks: 'ignore',
    // Styles are needed to recognise date-formatted numeric cells.
    styles: 'cache',
    entries: 'ignore',
  });
  const wanted = options.sheet?.trim().toLowerCase();
  const seen: string[] = [];
  let found = false;
  try {
    for await (const worksheet of reader) {
      const name = String((worksheet as unknown as { name?: string }).name ?? '');
      seen.push(name);
      if (wanted !== undefined && name.trim().toLowerCase() !== wanted) {
        // Drain sheets that are not read so the zip stream moves on.
        for await (const _row of worksheet) void _row;
        continue;
      }
      found = true;
      for await (const row of worksheet) {
        const values = row.values as unknown[];
        const cells: string[] = new Array(Math.max(0, values.length - 1));
        for (let i = 1; i < values.length; i++) cells[i - 1] = xlsxCellText(values[i]);
        yield { row: row.number, cells };
      }
      break;
    }
  } catch (error) {
    if (error instanceof SourceFailure) throw error;
    throw new SourceFailure('file-unreadable', 'The .xlsx file could not be read (the workbook is damaged or not an Excel workbook). Save it again from the spreadsheet program, or export it as CSV.');
  } finally {
    input.destroy();
  }
  if (!found) {
    const names = seen.map((s) => `"${s}"`).join(', ');
    throw new SourceFailure(
      'sheet-missing',
      wanted !== undefined
        ? `The workbook has no sheet named "${options.sheet}". Sheets found: ${names || 'none'}.`
        : 'The workbook has no worksheets.',
    );
  }
}
