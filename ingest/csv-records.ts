import { parse, type CsvError } from 'csv-parse';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import { decodeText } from './decode-text.js';
import { SourceFailure } from './source-failure.js';

/** One record as a spreadsheet would show it: row number (first line = 1) and cell texts. */
export interface SourceRecord {
  row: number;
  cells: string[];
}

export interface CsvRecordOptions {
  /** Largest record csv-parse will hold, in characters; bounds memory for a never-closed quote. */
  maxRecordChars: number;
  /** Told the delimiter once it is known, before the first record. */
  onDelimiter?: (delimiter: string) => void;
}

/** Records handed over per batch. */
const BATCH_RECORDS = 512;

/** How much decoded text to look at for the header line when choosing the delimiter. */
const HEADER_SNIFF_CHARS = 1 << 20;

/**
 * Choose the field delimiter from the header line: the most frequent of semicolon, comma
 * and tab outside quotes; comma when none is present (a one-column file).
 */
export function detectDelimiter(headerText: string): ',' | ';' | '\t' {
  let commas = 0;
  let semicolons = 0;
  let tabs = 0;
  let quoted = false;
  for (let i = 0; i < headerText.length; i++) {
    const c = headerText.charCodeAt(i);
    if (c === 34 /* " */) quoted = !quoted;
    else if (quoted) continue;
    else if (c === 10 /* \n */) break;
    else if (c === 44) commas++;
    else if (c === 59) semicolons++;
    else if (c === 9) tabs++;
  }
  if (semicolons > commas && semicolons >= tabs) return ';';
  if (tabs > commas && tabs > semicolons) return '\t';
  return ',';
}

async function* prepend(head: string, rest: AsyncIterator<string>): AsyncGenerator<string> {
  if (head.length > 0) yield head;
  for (;;) {
    const next = await rest.next();
    if (next.done) return;
    yield next.value;
  }
}

function describeCsvError(error: CsvError, row: number): SourceFailure {
  switch (error.code) {
    case 'CSV_QUOTE_NOT_CLOSED':
      return new SourceFailure(
        'file-unreadable',
        `Row ${row} opens a quoted cell (") that is never closed, so the rest of the file cannot be read. Close the quote or remove it.`,
        row,
      );
    case 'CSV_INVALID_CLOSING_QUOTE':
      return new SourceFailure(
        'file-unreadable',
        `Row ${row} has text right after a closing quote ("). Inside a quoted cell write a quote as "".`,
        row,
      );
    case 'CSV_MAX_RECORD_SIZE':
      return new SourceFailure('cell-too-long', `Row ${row} is too long to be a row of ratings (probably an unclosed quote or a huge cell).`, row);
    default:
      return new SourceFailure('file-unreadable', `Row ${row} could not be read as CSV (${error.code ?? 'malformed text'}).`, row);
  }
}

/**
 * Stream the records of a CSV text file, in batches, (any supported encoding, comma/semicolon/tab,
 * LF or CRLF). Blank lines come through as records of empty cells so that row numbers
 * match a spreadsheet. Throws SourceFailure for encoding and quoting faults.
 */
export async function* readCsvRecords(bytes: AsyncIterable<Uint8Array>, options: CsvRecordOptions): AsyncGenerator<SourceRecord[]> {
  const text = decodeText(bytes)[Symbol.asyncIterator]();
  let head = '';
  while (head.indexOf('\n') === -1 && head.length < HEADER_SNIFF_CHARS) {
    const next = await text.next();
    if (next.done) break;
    head += next.value;
  }
  // A first line "sep=;" (written by some spreadsheet exports) names the delimiter; spreadsheets
  // hide it, so it is dropped and the header stays row 1.
  const separatorLine = /^\uFEFF?sep=([,;\t])\r?\n/i.exec(head);
  let delimiter: ',' | ';' | '\t';
  if (separatorLine !== null) {
    delimiter = separatorLine[1] as ',' | ';' | '\t';
    head = head.slice(separatorLine[0].length);
  } else {
    delimiter = detectDelimiter(head);
  }
  options.onDelimiter?.(delimiter);

  const parser = parse({
    delimiter,
    // Keep blank lines so record count = spreadsheet row; field count is checked by the caller.
    skip_empty_lines: false,
    relax_column_count: true,
    // A quote inside an unquoted cell (12" plate) is kept as text.
    relax_quotes: true,
    max_record_size: options.maxRecordChars,
    bom: true,
    cast: false,
  });
  const input = Readable.from(prepend(head, text), { objectMode: false, encoding: 'utf8' });
  let inputFailure: unknown = null;
  const piping = pipeline(input, parser).catch((error: unknown) => {
    inputFailure = error;
  });
  // Drain the parser in batches: one await per batch instead of one per record, which is
  // most of the per-row cost of async iteration on a 2-core machine.
  let ended = false;
  let failure: unknown = null;
  let signalled = false;
  let wake: (() => void) | null = null;
  const signal = (): void => {
    signalled = true;
    const resolve = wake;
    wake = null;
    resolve?.();
  };
  parser.on('readable', signal);
  parser.on('end', () => {
    ended = true;
    signal();
  });
  parser.on('error', (error: unknown) => {
    failure ??= error;
    signal();
  });
  let row = 0;
  try {
    for (;;) {
      signalled = false;
      const batch: SourceRecord[] = [];
      let cells: string[] | null;
      while (batch.length < BATCH_RECORDS && (cells = parser.read() as string[] | null) !== null) {
        row++;
        batch.push({ row, cells });
      }
      if (batch.length > 0) {
        yield batch;
        continue;
      }
      if (failure !== null) throw failure;
      if (ended) break;
      if (!signalled) await new Promise<void>((resolve) => (wake = resolve));
    }
  } catch (error) {
    if (error instanceof SourceFailure) throw error;
    const code = error !== null && typeof error === 'object' ? (error as CsvError).code : undefined;
    if (typeof code === 'string' && (code.startsWith('CSV_') || code === 'INVALID_OPENING_QUOTE')) {
      // Records still buffered in the stream are dropped with the error, so take the
      // parser's own count of records before the fault rather than ours.
      const parsedBefore = (error as CsvError & { records?: unknown }).records;
      throw describeCsvError(error as CsvError, (typeof parsedBefore === 'number' ? Math.max(parsedBefore, row) : row) + 1);
    }
    throw error;
  } finally {
    input.destroy();
    parser.destroy();
    await piping;
  }
  if (inputFailure instanceof SourceFailure) throw inputFailure;
}
