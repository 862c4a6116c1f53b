/**
 * The one CSV writer for every CSV the tool emits (page downloads, `export`): the inverse of
 * the importer's reading, kept beside it so the two cannot drift apart.
 *
 * - Text is made spreadsheet-safe first (an apostrophe before a formula character at the start
 *   of the cell and of every line inside it; the importer strips exactly those).
 * - A field is quoted when it holds a quote, the delimiter, CR or LF, whatever the record
 *   delimiter is, so a line break inside a cell can never start a new record or a new line
 *   that a spreadsheet reads as a formula. Quotes inside are doubled (RFC 4180).
 * - Numbers are written as JavaScript's shortest round-trip form (read back exactly), -0 as 0,
 *   and are never prefixed (a negative rating stays a number).
 */
import { neutralizeFormulaText } from './spreadsheet-safe.js';

export type CsvValue = string | number | null;

export interface CsvFormat {
  /** Between fields; default ",". */
  delimiter?: ',' | ';';
  /** After every record; default "\r\n" (RFC 4180). */
  recordDelimiter?: '\r\n' | '\n';
}

function needsQuotes(text: string, delimiter: string): boolean {
  for (let i = 0; i < text.length; i++) {
    const ch = text[i];
    if (ch === '"' || ch === delimiter || ch === '\n' || ch === '\r') return true;
  }
  return false;
}

/** One field as it appears in the file. */
export function csvField(value: CsvValue, delimiter: ',' | ';' = ','): string {
  if (value === null) return '';
  if (typeof value === 'number') {
    if (!Number.isFinite(value)) return '';
    return Object.is(value, -0) ? '0' : String(value);
  }
  const safe = neutralizeFormulaText(value);
  return needsQuotes(safe, delimiter) ? `"${safe.replace(/"/g, '""')}"` : safe;
}

/** One record, record delimiter included. */
export function csvRecord(values: readonly CsvValue[], format: CsvFormat = {}): string {
  const delimiter = format.delimiter ?? ',';
  let line = '';
  for (let i = 0; i < values.length; i++) line += (i === 0 ? '' : delimiter) + csvField(values[i], delimiter);
  return line + (format.recordDelimiter ?? '\r\n');
}

/** Several records (a chunk of a file, or a whole file with its header as the first record). */
export function csvRecords(records: readonly (readonly CsvValue[])[], format: CsvFormat = {}): string {
  let text = '';
  for (const record of records) text += csvRecord(record, format);
  return text;
}
