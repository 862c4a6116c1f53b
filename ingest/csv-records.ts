import type { CsvError } from 'csv-parse';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import Papa from 'papaparse';
import { decodeText } from './decode-text.js';
import { SourceFailure } from './source-failure.js';

/** One record as a spreadsheet would show it: row number (first line = 1) and cell texts. */
export interface SourceRecord {
  row: number;
  cells: string[];
}

export interface CsvRecordOptions {
  /** Largest record held while it is incomplete, in characters; bounds memory for a never-closed quote. */
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

/** The record separator: the first line break of the header text (as CSV readers auto-detect it). */
export function detectNewline(headerText: string): '\n' | '\r' | '\r\n' {
  const at = headerText.search(/[\r\n]/);
  if (at === -1 || headerText[at] === '\n') return '\n';
  return headerText[at + 1] === '\n' ? '\r\n' : '\r';
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
 * csv-parse over `first` and the rest of the text: the reader for files whose quoting papaparse
 * finds malformed. With relax_quotes it keeps a quote inside a cell as text ("a"b, 12" plate)
 * and names the row of a never-closed quote. `rowsBefore` records were handed over already.
 */
async function* readWithCsvParse(
  first: string,
  rest: AsyncIterator<string>,
  delimiter: string,
  rowsBefore: number,
  options: CsvRecordOptions,
): AsyncGenerator<SourceRecord[]> {
  // Loaded on first use: only files with quoting papaparse finds malformed come here.
  const { parse } = await import('csv-parse');
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
  const input = Readable.from(prepend(first, rest), { objectMode: false, encoding: 'utf8' });
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
  let row = rowsBefore;
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
      throw describeCsvError(error as CsvError, (typeof parsedBefore === 'number' ? Math.max(rowsBefore + parsedBefore, row) : row) + 1);
    }
    throw error;
  } finally {
    input.destroy();
    parser.destroy();
    await piping;
  }
  if (inputFailure instanceof SourceFailure) throw inputFailure;
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

  if (head.charCodeAt(0) === 0xfeff) head = head.slice(1);
  const newline = detectNewline(head);
  const parser = new Papa.Parser({ delimiter, newline, quoteChar: '"' });
  // papaparse lets white space stand between a closing quote and the delimiter or line break
  // ("a"  ,); csv-parse keeps such a cell as text. Text with that pattern goes to csv-parse
  // (a false alarm inside a quoted cell only costs speed).
  const looseClosingQuote = new RegExp(`"${newline === '\r\n' ? '(?!\r\n)' : ''}[^\\S\n]+(?:${delimiter}|\n|$)`);

  // Text is parsed as it arrives; the record cut off at the end of what has arrived so far
  // (`pending`) is parsed again with the next text. Text is gathered until there is at least
  // as much new text as pending, so a long record (a quoted cell with line breaks, an
  // unclosed quote) is re-read a logarithmic number of times, not once per chunk.
  let pending = head;
  let done = false;
  let inputFailure: unknown = null;
  let row = 0;
  try {
    while (!done && inputFailure === null) {
      let input = pending;
      let added = 0;
      while (added === 0 || added < pending.length) {
        let next: IteratorResult<string>;
        try {
          next = await text.next();
        } catch (error) {
          // Hand over the records before the fault first, as a streaming parser would.
          inputFailure = error;
          break;
        }
        if (next.done) {
          done = true;
          break;
        }
        input += next.value;
        added += next.value.length;
      }
      if (input.length === 0) break;
      if (input.indexOf('"') !== -1 && looseClosingQuote.test(input)) {
        if (inputFailure !== null) throw inputFailure;
        yield* readWithCsvParse(input, text, delimiter, row, options);
        return;
      }
      const result = parser.parse(input, 0, !done);
      // A fault in the record cut off at the end may only be the cut (a closing quote whose line
      // break has not arrived yet); that record is parsed again with more text.
      let cutRecordFault = false;
      for (const error of result.errors) {
        if (!done && error.row >= result.data.length) {
          cutRecordFault = true;
          continue;
        }
        if (inputFailure !== null) throw inputFailure;
        // Malformed quoting: csv-parse reads the rest from this record on, as it read every
        // file before, with its relaxed quote rules.
        yield* readWithCsvParse(input, text, delimiter, row, options);
        return;
      }
      const data = result.data;
      let nRecords = data.length;
      // A line break at the very end closes the last record; it does not open an empty one.
      if (done && nRecords > 0 && input.endsWith(newline)) {
        const last = data[nRecords - 1];
        if (last.length === 1 && last[0] === '') nRecords--;
      }
      for (let at = 0; at < nRecords; at += BATCH_RECORDS) {
        const end = Math.min(nRecords, at + BATCH_RECORDS);
        const batch: SourceRecord[] = new Array(end - at);
        for (let i = at; i < end; i++) batch[i - at] = { row: ++row, cells: data[i] };
        yield batch;
      }
      if (done) break;
      pending = input.slice(result.meta.cursor);
      if (pending.length > options.maxRecordChars && cutRecordFault && inputFailure === null) {
        yield* readWithCsvParse(pending, text, delimiter, row, options);
        return;
      }
      if (pending.length > options.maxRecordChars) {
        throw new SourceFailure('cell-too-long', `Row ${row + 1} is too long to be a row of ratings (probably an unclosed quote or a huge cell).`, row + 1);
      }
    }
  } finally {
    await text.return?.(undefined);
  }
  if (inputFailure !== null) throw inputFailure;
}
