/**
 * bytes → validated ratings, as a stream of events. Pure reading: no database, no clock.
 *
 * Formats: CSV long form (session,date,assessor,product,replicate,attribute,value[,code])
 * and wide form (session,date,assessor,product,replicate[,code], then one column per
 * attribute; an empty cell is a missing rating), from CSV text (UTF-8 with or without BOM,
 * UTF-16 LE/BE with BOM; comma, semicolon or tab; LF or CRLF) or an .xlsx worksheet.
 * The rules for decimal marks and dates are documented in cells.ts.
 *
 * Every problem names the file, the row as a spreadsheet shows it (header = 1) and the
 * column header as written. A value cell that cannot become a rating is attached (as a
 * RawCell) to exactly one problem event, so the quarantine gets each rejected cell once:
 * - cell-level problems (bad value, out of scale, missing long-form value) carry `cell`;
 * - a problem with the row's keys (bad date, replicate, missing assessor, …) rejects every
 *   value cell of the row: the row's first key problem carries the first non-empty value
 *   cell as `cell` and the row's other non-empty value cells in `moreCells` (wide form);
 *   further problems of the same row carry `cell: null`;
 * - row-shape problems (field count) carry `cell: null`: the row's cells cannot be trusted;
 * - whole-file and header problems carry `cell: null` and end the reading;
 * - a row whose keys are bad (or whose shape is wrong) yields no 'missing' events.
 * Row numbers count records, so a quoted line break does not start a new row; blank rows
 * are skipped but counted. A first line "sep=;" is honoured and not counted.
 * Set-level checks (duplicate keys, one session label with two dates) belong to the store.
 * readRatingBatches gives the same events in arrays; readCompactBatches (compact-batches.ts) gives
 * them as typed-array batches for the import, and readRatingColumns (read-columns.ts) as columns for
 * `analyze`, both through readIntoSink without an object per rating.
 */
import { open } from 'node:fs/promises';
import { closeSync, createReadStream, openSync, readSync } from 'node:fs';
import { Readable } from 'node:stream';
import type { ProblemCode } from '../domain/problems.js';
import type { DecimalMark } from './cells.js';
import { readCsvRecords, type SourceRecord } from './csv-records.js';
import { detectFileKind } from './file-kind.js';
import { resolveColumnLayout } from './headers.js';
import { checkName, showHidden } from './names.js';
import type { InputSource, ReadEvent, ReadRatingsOptions, ReadSink } from './read-types.js';
import { DEFAULT_MAX_CELL_CHARS, DEFAULT_MAX_COLUMNS, RowReader } from './row-reader.js';
import { SourceFailure } from './source-failure.js';
import { readXlsxRecords, withOneRetryOnTransientFailure } from './xlsx-records.js';

export { detectFileKind, type FileKind } from './file-kind.js';
export type { InputSource, RawCell, ReadEvent, ReadRatingsOptions, ReadSink } from './read-types.js';
export { oneYearAfter } from './row-cells.js';

/** A sink that keeps the events themselves (readRatingBatches). */
class EventArraySink implements ReadSink {
  events: ReadEvent[] = [];
  get length(): number {
    return this.events.length;
  }
  push(event: ReadEvent): void {
    this.events.push(event);
  }
  rating(row: number, column: string, session: string, assessor: string, product: string, replicate: number, attribute: string, value: number, date: string, code: string | null): void {
    this.events.push({ type: 'rating', row, column, rating: { session, assessor, product, replicate, attribute, value, date, code } });
  }
  take(): ReadEvent[] {
    const events = this.events;
    this.events = [];
    return events;
  }
}

const DEFAULT_STALL_TIMEOUT_MS = 5000;
/** Events handed over per batch by readRatingBatches (at least; a CSV batch of records may give more). */
const EVENTS_PER_BATCH = 1024;
/**
 * Read size for files and for slicing in-memory bytes. 16 KB, not 64: the parsed records of one
 * chunk are alive while it is checked, and with a quarter of them the garbage collector's young
 * generation stays at half the size (17 instead of 34 MB for a year's file). Fresh memory is
 * what costs here: `analyze` of the unbalanced benchmark year 0.80 s instead of 0.87 s.
 */
const CHUNK_BYTES = 1 << 14;
/** Message of the catch-all; property tests assert it never appears. */
export const UNEXPECTED_READ_FAILURE = 'The file could not be read because of an unexpected error in the reader.';

async function* sliceBytes(bytes: Uint8Array): AsyncGenerator<Uint8Array> {
  for (let at = 0; at < bytes.length; at += CHUNK_BYTES) yield bytes.subarray(at, at + CHUNK_BYTES);
}

/**
 * A CSV file's bytes, read synchronously chunk by chunk. A file stream waits for the thread pool
 * on every chunk: 37 ms of a year's 170 ms of reading was the main thread idle. A local 16 KB
 * read blocks for microseconds. Each chunk is a new array (the decoder may keep a short tail).
 */
async function* fileChunks(path: string): AsyncGenerator<Uint8Array> {
  const fd = openSync(path, 'r');
  try {
    for (;;) {
      const chunk = new Uint8Array(CHUNK_BYTES);
      const bytesRead = readSync(fd, chunk, 0, CHUNK_BYTES, null);
      if (bytesRead === 0) return;
      yield bytesRead === CHUNK_BYTES ? chunk : chunk.subarray(0, bytesRead);
    }
  } finally {
    closeSync(fd);
  }
}

function byteStream(source: InputSource): Readable {
  if ('bytes' in source) return Readable.from(sliceBytes(source.bytes), { objectMode: false });
  return createReadStream(source.path, { highWaterMark: CHUNK_BYTES });
}

async function readHead(source: InputSource): Promise<Uint8Array> {
  if ('bytes' in source) return source.bytes.subarray(0, 8);
  const handle = await open(source.path, 'r');
  try {
    const head = new Uint8Array(8);
    const { bytesRead } = await handle.read(head, 0, 8, 0);
    return head.subarray(0, bytesRead);
  } finally {
    await handle.close();
  }
}

function isBlankRecord(cells: readonly string[]): boolean {
  for (let i = 0; i < cells.length; i++) if (cells[i].trim() !== '') return false;
  return true;
}

/**
 * Read and validate a ratings file (CSV or .xlsx, decided by its first bytes).
 * Never throws for bad input: every fault becomes a problem event naming file, row and column.
 * @example
 *   for await (const e of readRatings({ path }, { fileName: 'week12.csv', scaleFor: () => ({ min: 0, max: 10 }) })) …
 */
export async function* readRatings(source: InputSource, options: ReadRatingsOptions): AsyncGenerator<ReadEvent> {
  for await (const batch of readRatingBatches(source, options)) yield* batch;
}

/**
 * The same events as readRatings, in order, handed over in arrays of up to a few thousand
 * (one await per batch instead of one per event: about a fifth of the reading time for
 * long-form files). Each array is new; the consumer may keep it.
 */
export async function* readRatingBatches(source: InputSource, options: ReadRatingsOptions): AsyncGenerator<ReadEvent[]> {
  const sink = new EventArraySink();
  for await (const _ of readIntoSink(source, options, sink, EVENTS_PER_BATCH, true)) yield sink.take();
}

/**
 * The reading behind readRatingBatches and readCompactBatches: puts the events into `sink` and
 * yields (nothing) whenever the consumer should take them: at least `eventsPerBatch` are held,
 * or the reading ends. `internKeys`: give rows one string object per distinct key text.
 */
export async function* readIntoSink(
  source: InputSource,
  options: ReadRatingsOptions,
  sink: ReadSink,
  eventsPerBatch: number,
  internKeys: boolean,
): AsyncGenerator<void> {
  const file = options.fileName;
  const fileProblem = (code: ProblemCode, message: string, row: number | null = null, column: string | null = null): Exclude<ReadEvent, { type: 'rating' }> =>
    problemOfFile(file, code, message, row, column);

  let head: Uint8Array;
  try {
    head = await readHead(source);
  } catch {
    sink.push(fileProblem('file-unreadable', 'The file could not be opened for reading.'));
    yield;
    return;
  }
  const kind = detectFileKind(head);
  if (kind === 'empty') {
    sink.push(fileProblem('file-empty', 'The file is empty; it needs a header row and at least one row of ratings.'));
    yield;
    return;
  }
  if (kind === 'xls') {
    sink.push(fileProblem('file-unreadable', 'This is an old-style .xls workbook, which cannot be read; save it as .xlsx (Excel Workbook) or as CSV UTF-8.'));
    yield;
    return;
  }
  if (kind === 'binary') {
    sink.push(fileProblem('file-unreadable', 'This file is not a spreadsheet or CSV text (it looks like a PDF, image or archive); upload a CSV or .xlsx file.'));
    yield;
    return;
  }

  const maxColumns = options.maxColumns ?? DEFAULT_MAX_COLUMNS;
  const maxCellChars = options.maxCellChars ?? DEFAULT_MAX_CELL_CHARS;
  let decimalMark: DecimalMark = '.';
  const records: AsyncGenerator<SourceRecord[]> =
    kind === 'xlsx'
      ? withOneRetryOnTransientFailure(() => readXlsxRecords(byteStream(source), {
            sheet: options.sheet,
            stallTimeoutMs: options.stallTimeoutMs ?? DEFAULT_STALL_TIMEOUT_MS,
            limits: { maxCellChars, maxExpandedBytes: options.maxXlsxExpandedBytes },
          }))
      : readCsvRecords('bytes' in source ? sliceBytes(source.bytes) : fileChunks(source.path), {
          // A row may hold every column at full cell length; beyond that it is a broken quote.
          maxRecordChars: maxCellChars * Math.min(maxColumns + 1, 2001) + maxColumns,
          onDelimiter: (delimiter) => {
            decimalMark = delimiter === ';' ? ',' : '.';
          },
        });

  let reader: RowReader | null = null;
  const out = sink;
  try {
    for await (const batch of records) {
      for (let r = 0; r < batch.length; r++) {
        const record = batch[r];
        if (reader === null) {
          if (isBlankRecord(record.cells)) continue;
          reader = startRowReader(record, { file, csv: kind === 'csv', decimalMark, maxColumns, maxCellChars, options, internKeys }, out);
          if (reader === null) {
            yield;
            return;
          }
        } else if (!isBlankRecord(record.cells)) {
          reader.readRow(record, out);
          if (reader.fatal !== null) {
            out.push({ type: 'problem', cell: null, problem: reader.fatal });
            yield;
            return;
          }
        }
      }
      // xlsx hands over one row at a time: collect a few before handing them on.
      if (out.length >= eventsPerBatch) yield;
    }
    if (out.length > 0) yield;
  } catch (error) {
    // The events read before the fault come first, as a streaming parser would hand them over.
    if (error instanceof SourceFailure) sink.push(fileProblem(error.code, error.message, error.row, error.column));
    else sink.push(fileProblem('file-unreadable', UNEXPECTED_READ_FAILURE));
    yield;
    return;
  } finally {
    await records.return(undefined);
  }

  if (reader === null) {
    sink.push(fileProblem('file-empty', 'The file has no header row (it is blank); it needs a header row and at least one row of ratings.'));
    yield;
    return;
  }
  if (reader.nDataRows === 0) {
    sink.push(fileProblem('file-empty', 'The file has a header row but no rows of ratings.', 2));
    yield;
    return;
  }
  if (reader.nMissing > 0) {
    sink.push({
      type: 'finding',
      finding: {
        code: 'missing-cells',
        file,
        row: null,
        column: null,
        message: `${reader.nMissing} empty cell${reader.nMissing === 1 ? ' was' : 's were'} read as missing ratings.`,
      },
    });
    yield;
  }
}

/** A problem with the whole file (no cell of it is held for quarantine). */
function problemOfFile(file: string, code: ProblemCode, message: string, row: number | null = null, column: string | null = null): Exclude<ReadEvent, { type: 'rating' }> {
  return { type: 'problem', cell: null, problem: { code, file, row, column, message } };
}

/** What the header row is checked with. */
interface HeaderContext {
  file: string;
  /** CSV rather than .xlsx. */
  csv: boolean;
  decimalMark: DecimalMark;
  maxColumns: number;
  maxCellChars: number;
  options: ReadRatingsOptions;
  internKeys: boolean;
}

/**
 * The header row: its size, its columns and the wide form's attribute names. Returns the row
 * reader for the data rows, or null when the header's problems (put into `sink`) end the reading.
 */
function startRowReader(record: SourceRecord, header: HeaderContext, sink: ReadSink): RowReader | null {
  const { file, maxColumns, maxCellChars } = header;
  if (record.cells.length > maxColumns) {
    sink.push(problemOfFile(file, 'too-many-columns', `The header row has ${record.cells.length} columns; the most this reader accepts is ${maxColumns}.`, record.row));
    return null;
  }
  const longCell = record.cells.findIndex((c) => c.length > maxCellChars);
  if (longCell !== -1) {
    sink.push(problemOfFile(file, 'cell-too-long', `Header cell ${longCell + 1} holds ${record.cells[longCell].length} characters; the most a cell may hold is ${maxCellChars}.`, record.row));
    return null;
  }
  const { layout, problems } = resolveColumnLayout(record.cells, record.row, header.csv);
  if (layout === null) {
    for (const p of problems) sink.push({ type: 'problem', cell: null, problem: { ...p, file } });
    return null;
  }
  // Wide form: attribute names are header cells; checked (and NFC-normalised) once here.
  let badAttribute = false;
  for (const column of layout.attributeColumns) {
    const check = checkName(column.attribute, 'attribute');
    if (check.ok) column.attribute = check.name;
    else {
      sink.push({ type: 'problem', cell: null, problem: { code: 'name-invalid', file, row: record.row, column: showHidden(column.attribute), message: check.reason } });
      badAttribute = true;
    }
  }
  if (badAttribute) return null;
  const reader = new RowReader(file, layout, header.decimalMark, header.csv, header.options, header.internKeys);
  if (layout.form === 'wide') reader.checkHeaderScales(record.row, sink);
  return reader;
}
