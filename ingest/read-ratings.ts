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
 * them as typed-array batches for the import, through readIntoSink without an object per rating.
 */
import { open } from 'node:fs/promises';
import { createReadStream } from 'node:fs';
import { Readable } from 'node:stream';
import type { InputFinding, InputProblem, ProblemCode, RawCell } from '../domain/problems.js';
import type { Rating, ScaleRange } from '../domain/ratings.js';
import { parseRatingValue, parseReplicate, parseSessionDate, type CellResult, type DecimalMark } from './cells.js';
import { readCsvRecords, type SourceRecord } from './csv-records.js';
import { detectFileKind } from './file-kind.js';
import { resolveColumnLayout, truncateText, type ColumnLayout } from './headers.js';
import { checkName, showHidden, type NameCheck } from './names.js';
import { SourceFailure } from './source-failure.js';
import { restoreFormulaText } from './spreadsheet-safe.js';
import { readXlsxRecords, withOneRetryOnTransientFailure } from './xlsx-records.js';

export { detectFileKind, type FileKind } from './file-kind.js';

export type InputSource = { path: string } | { bytes: Uint8Array };

export interface ReadRatingsOptions {
  /** File name as the user named it; used in every problem. */
  fileName: string;
  /** .xlsx: sheet name (default: the first sheet); 'sheet-missing' when absent. Ignored for CSV. */
  sheet?: string;
  /**
   * Scale for an attribute: a range; null when unknown (one 'scale-missing' problem per
   * attribute, saying how to give it); or 'unchecked' (no scale check, analyze command).
   * Called once per attribute.
   */
  scaleFor(attribute: string): ScaleRange | null | 'unchecked';
  /** Header cells beyond this → 'too-many-columns'. Default 2000. */
  maxColumns?: number;
  /** Cells longer than this (characters) → 'cell-too-long'. Default 10,000. */
  maxCellChars?: number;
  /**
   * Today's date (YYYY-MM-DD) from the caller's clock (this module has none): session dates
   * more than a year later get a 'future-date' finding. No check when absent.
   */
  today?: string;
  /** .xlsx: most bytes the workbook may unzip to, checked while unzipping. Default 200 MB. */
  maxXlsxExpandedBytes?: number;
  /** .xlsx: give up on a damaged workbook when reading makes no progress for this long. Default 5000 ms. */
  stallTimeoutMs?: number;
}

export type { RawCell } from '../domain/problems.js';

/**
 * Where a row reader puts its events, in reading order: ratings through `rating` (so a compact
 * consumer need not build an object per rating), everything else through `push`.
 */
export interface ReadSink {
  push(event: Exclude<ReadEvent, { type: 'rating' }>): void;
  rating(row: number, column: string, session: string, assessor: string, product: string, replicate: number, attribute: string, value: number, date: string, code: string | null): void;
  /** Events held so far (ratings included). */
  readonly length: number;
}

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

export type ReadEvent =
  /** row as a spreadsheet shows it (header = 1); column = header of the value cell. */
  | { type: 'rating'; row: number; column: string; rating: Rating }
  /** An empty value cell in wide form: a missing rating, not an error. */
  | { type: 'missing'; row: number; column: string; cell: RawCell }
  /** Blocking. `cell` (and `moreCells`) are the value cells this problem rejects; see the module comment. */
  | { type: 'problem'; problem: InputProblem; cell: RawCell | null; moreCells?: RawCell[] }
  /** Not blocking. */
  | { type: 'finding'; finding: InputFinding };

const DEFAULT_MAX_COLUMNS = 2000;
const DEFAULT_MAX_CELL_CHARS = 10_000;
const DEFAULT_STALL_TIMEOUT_MS = 5000;
/** Events handed over per batch by readRatingBatches (at least; a CSV batch of records may give more). */
const EVENTS_PER_BATCH = 1024;
/** Read size for files and for slicing in-memory bytes. */
const CHUNK_BYTES = 1 << 16;
/** Message of the catch-all; property tests assert it never appears. */
export const UNEXPECTED_READ_FAILURE = 'The file could not be read because of an unexpected error in the reader.';

async function* sliceBytes(bytes: Uint8Array): AsyncGenerator<Uint8Array> {
  for (let at = 0; at < bytes.length; at += CHUNK_BYTES) yield bytes.subarray(at, at + CHUNK_BYTES);
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
 * Cell text trimmed; for CSV also with the export's apostrophe formula prefix removed
 * (.xlsx cells are typed, so export never prefixes them and an apostrophe there is data).
 */
function cellText(text: string | undefined, restoreFormulas: boolean): string {
  if (text === undefined) return '';
  // Common case first: printable ASCII at both ends (nothing to trim) and no apostrophe that the
  // export could have added (at the start, or after a line break inside the cell).
  const first = text.charCodeAt(0);
  const last = text.charCodeAt(text.length - 1);
  if (first > 32 && first < 127 && last > 32 && last < 127 && (!restoreFormulas || text.indexOf("'") === -1)) return text;
  const trimmed = text.trim();
  if (!restoreFormulas) return trimmed;
  return restoreFormulaText(trimmed).trim();
}

function formatNumber(value: number): string {
  return String(Number(value.toPrecision(12)));
}

function formatScale(scale: ScaleRange): string {
  return `${formatNumber(scale.min)}–${formatNumber(scale.max)}`;
}

/** Distinct texts remembered per kind of cell; beyond that, cells are parsed each time (memory stays bounded). */
const MAX_CACHED_TEXTS = 10_000;

/** A parse result by cell text (results are never changed, so rows may share one). */
function parseCached<T>(cache: Map<string, T>, text: string, parse: (text: string) => T): T {
  let parsed = cache.get(text);
  if (parsed === undefined) {
    parsed = parse(text);
    if (cache.size < MAX_CACHED_TEXTS) cache.set(text, parsed);
  }
  return parsed;
}

const KEY_ROLES = ['session', 'assessor', 'product', 'attribute'] as const;
type KeyRole = (typeof KEY_ROLES)[number];
const KEY_ROLE_INDEX: Record<KeyRole, number> = { session: 0, assessor: 1, product: 2, attribute: 3 };
const KEY_ROLE_NAMES = ['session label', 'assessor', 'product', 'attribute'];

/** The same calendar day a year later (29 February → 1 March), for YYYY-MM-DD text. */
export function oneYearAfter(isoDate: string): string {
  const [year, month, day] = isoDate.split('-').map(Number);
  return new Date(Date.UTC(year + 1, month - 1, day)).toISOString().slice(0, 10);
}

/** Row reader state for one file; created after the header row is resolved. */
class RowReader {
  readonly file: string;
  private readonly layout: ColumnLayout;
  private readonly decimalMark: DecimalMark;
  /** CSV: field counts must match the header, and apostrophe formula prefixes are removed. */
  private readonly csv: boolean;
  private readonly maxCellChars: number;
  private readonly scaleFor: ReadRatingsOptions['scaleFor'];
  private readonly scales = new Map<string, ScaleRange | null | 'unchecked'>();
  private readonly maxAttributes: number;
  /** A problem that ends the reading (set while reading a row; the caller stops after that row). */
  fatal: InputProblem | null = null;
  private readonly nColumns: number;
  private readonly valueColumns: { index: number; attribute: string | null }[];
  /** Parsed cells by text: a file repeats few distinct dates, replicates and values (one decimal on a 0–10 scale: 101). */
  private readonly dates = new Map<string, ReturnType<typeof parseSessionDate>>();
  private readonly replicates = new Map<string, CellResult<number>>();
  private readonly values = new Map<string, CellResult<number>>();
  /** Key texts (session, assessor, product, attribute) by text, and the last of each role; see intern(). */
  private readonly keyTexts = new Map<string, string>();
  private readonly lastKeyTexts: (string | null)[] = KEY_ROLES.map(() => null);
  /** False when the sink keeps no key strings (compact batches intern them to integers themselves). */
  private readonly internKeys: boolean;
  /** Column of each key role (KEY_ROLES order); -1 when absent (attribute in wide form). */
  private readonly keyColumns: number[];
  private lastReplicateText = '';
  private lastReplicate: CellResult<number> | null = null;
  private lastScaleAttribute: string | null = null;
  private lastScale: ScaleRange | null | 'unchecked' = null;
  private lastDateText = '';
  private lastDate: ReturnType<typeof parseSessionDate> | null = null;
  private readonly parseValue: (text: string) => CellResult<number>;
  /** Reused per row (cleared at the start of readRow). */
  private readonly keyProblems: InputProblem[] = [];
  /** Name checks by text, per key role; the last text of each role is compared first. */
  private readonly nameChecks: Map<string, NameCheck>[] = KEY_ROLES.map(() => new Map());
  private readonly lastNameTexts: (string | null)[] = KEY_ROLES.map(() => null);
  private readonly lastNameChecks: (NameCheck | null)[] = KEY_ROLES.map(() => null);
  /** Dates after this (a year after the caller's today) get a finding, once per date. */
  private readonly latestExpectedDate: string | null;
  private readonly futureDatesNoted = new Set<string>();
  nMissing = 0;
  nDataRows = 0;

  constructor(file: string, layout: ColumnLayout, decimalMark: DecimalMark, csv: boolean, options: ReadRatingsOptions, internKeys: boolean) {
    this.file = file;
    this.internKeys = internKeys;
    this.layout = layout;
    this.decimalMark = decimalMark;
    this.csv = csv;
    this.maxCellChars = options.maxCellChars ?? DEFAULT_MAX_CELL_CHARS;
    this.maxAttributes = options.maxColumns ?? DEFAULT_MAX_COLUMNS;
    this.scaleFor = options.scaleFor;
    this.nColumns = layout.headers.length;
    this.keyColumns = KEY_ROLES.map((role) => layout.index[role] ?? -1);
    this.valueColumns =
      layout.form === 'long'
        ? [{ index: layout.index.value!, attribute: null }]
        : layout.attributeColumns.map((c) => ({ index: c.index, attribute: c.attribute }));
    this.parseValue = (text) => parseRatingValue(text, decimalMark);
    this.latestExpectedDate = options.today !== undefined && /^\d{4}-\d{2}-\d{2}$/.test(options.today) ? oneYearAfter(options.today) : null;
  }

  private checkedName(text: string, roleIndex: number): NameCheck {
    if (text === this.lastNameTexts[roleIndex]) return this.lastNameChecks[roleIndex]!;
    const check = parseCached(this.nameChecks[roleIndex], text, (t) => checkName(t, KEY_ROLE_NAMES[roleIndex]));
    this.lastNameTexts[roleIndex] = text;
    this.lastNameChecks[roleIndex] = check;
    return check;
  }

  private noteFutureDate(date: string, row: number, column: string, session: string, out: ReadSink): void {
    if (this.futureDatesNoted.has(date) || this.futureDatesNoted.size >= MAX_CACHED_TEXTS) return;
    this.futureDatesNoted.add(date);
    out.push({
      type: 'finding',
      finding: {
        code: 'future-date',
        file: this.file,
        row,
        column,
        message: `The session date ${date} is more than a year after today; check the year (the ratings were read as dated).`,
        session,
      },
    });
  }

  private text(cell: string | undefined): string {
    return cellText(cell, this.csv);
  }

  private parseDate(text: string): ReturnType<typeof parseSessionDate> {
    // Consecutive rows mostly share the date: compare before hashing.
    if (text !== this.lastDateText || this.lastDate === null) {
      this.lastDate = parseCached(this.dates, text, parseSessionDate);
      this.lastDateText = text;
    }
    return this.lastDate;
  }

  private requiredText(cells: readonly string[], role: KeyRole, row: number, problems: InputProblem[]): string {
    const roleIndex = KEY_ROLE_INDEX[role];
    const column = this.keyColumns[roleIndex];
    const value = cellText(cells[column], this.csv);
    if (value === '') {
      problems.push(this.problem('missing-value', row, this.layout.headers[column], `The ${role} is missing; every row needs one.`, ''));
      return this.intern(value, roleIndex);
    }
    const check = this.checkedName(value, roleIndex);
    if (!check.ok) {
      problems.push(this.problem('name-invalid', row, this.layout.headers[column], check.reason, showHidden(value)));
      return this.intern(value, roleIndex);
    }
    return this.intern(check.name, roleIndex);
  }

  /**
   * One string object per distinct key text: every rating of session S01 holds the same 'S01',
   * so the parser's copy of each cell dies young instead of being kept (and copied by the
   * garbage collector) with every rating. Consecutive rows mostly repeat a key (same session,
   * assessor, attribute): the text is compared with the last one of its role before hashing.
   */
  private intern(text: string, role: number): string {
    if (!this.internKeys) return text;
    const last = this.lastKeyTexts[role];
    if (text === last) return last;
    let known = this.keyTexts.get(text);
    if (known === undefined) {
      known = text;
      if (this.keyTexts.size < MAX_CACHED_TEXTS) this.keyTexts.set(text, text);
    }
    this.lastKeyTexts[role] = known;
    return known;
  }

  problem(code: ProblemCode, row: number | null, column: string | null, message: string, value?: string | null): InputProblem {
    const problem: InputProblem = { code, file: this.file, row, column, message };
    if (value !== undefined) problem.value = value === null ? null : truncateText(value);
    return problem;
  }

  /** Scale of an attribute, asking once; the scale-missing problem goes to `out`. */
  private scaleOf(attribute: string, row: number, column: string, out: ReadSink): ScaleRange | null | 'unchecked' {
    let scale = this.scales.get(attribute);
    if (scale === undefined) {
      if (this.scales.size >= this.maxAttributes && this.fatal === null) {
        // Bounds memory (and calls to scaleFor) for a long-form file with a new attribute on every row.
        this.fatal = this.problem(
          'too-many-columns',
          row,
          column,
          `The file names more than ${this.maxAttributes} different attributes; the most this reader accepts is ${this.maxAttributes}. Check the attribute column.`,
          attribute,
        );
      }
      scale = this.scaleFor(attribute);
      this.scales.set(attribute, scale);
      if (scale === null) {
        out.push({
          type: 'problem',
          cell: null,
          problem: this.problem(
            'scale-missing',
            row,
            column,
            `Attribute "${truncateText(attribute, 60)}" has no rating scale yet. Give it with --scale MIN:MAX on the command line, in the scale fields of the upload form, or in a panel settings file.`,
            attribute,
          ),
        });
      }
    }
    return scale;
  }

  /** Wide form: ask for every attribute's scale once, at the header row. */
  checkHeaderScales(headerRow: number, out: ReadSink): void {
    for (const c of this.layout.attributeColumns) this.scaleOf(c.attribute, headerRow, c.attribute, out);
  }

  /** Validate one non-blank data row, appending its events to `out`. */
  readRow(record: SourceRecord, out: ReadSink): void {
    const { row, cells } = record;
    const layout = this.layout;
    const headers = layout.headers;
    this.nDataRows++;

    if (cells.length !== this.nColumns) {
      let extraFilled = false;
      for (let i = this.nColumns; i < cells.length; i++) if (cells[i].trim() !== '') extraFilled = true;
      if (extraFilled || (this.csv && cells.length < this.nColumns)) {
        out.push({
          type: 'problem',
          cell: null,
          problem: this.problem(
            'row-field-count',
            row,
            null,
            this.csv
              ? `This row has ${cells.length} cells but the header row has ${this.nColumns} columns; check for a missing or extra delimiter or an unquoted comma.`
              : `This row has values beyond the last of the ${this.nColumns} header columns; give those columns a header or empty them.`,
          ),
        });
        return;
      }
    }

    // Key cells. Problems here reject the whole row; they are collected first.
    const keyProblems = this.keyProblems;
    keyProblems.length = 0;
    for (let i = 0; i < cells.length && i < this.nColumns; i++) {
      if (cells[i].length > this.maxCellChars) {
        keyProblems.push(
          this.problem('cell-too-long', row, headers[i], `This cell holds ${cells[i].length} characters; the most a cell may hold is ${this.maxCellChars}.`, cells[i].slice(0, 80)),
        );
      }
    }
    for (const i of layout.unnamedColumns) {
      const text = cells[i];
      if (text !== undefined && text.trim() !== '' && text.length <= this.maxCellChars) {
        keyProblems.push(this.problem('header-unknown-column', row, `column ${i + 1}`, `Column ${i + 1} has no header but this row has a value in it; give the column a name or empty the cell.`, text));
      }
    }
    const ix = layout.index;
    const session = this.requiredText(cells, 'session', row, keyProblems);
    const assessor = this.requiredText(cells, 'assessor', row, keyProblems);
    const product = this.requiredText(cells, 'product', row, keyProblems);

    const dateText = this.text(cells[ix.date!]);
    let date = '';
    if (dateText === '') {
      keyProblems.push(this.problem('missing-value', row, headers[ix.date!], 'The session date is missing; write it as YYYY-MM-DD.', ''));
    } else {
      const parsed = this.parseDate(dateText);
      if (parsed.ok) {
        date = parsed.value;
        if (this.latestExpectedDate !== null && date > this.latestExpectedDate) this.noteFutureDate(date, row, headers[ix.date!], session, out);
      } else keyProblems.push(this.problem(parsed.code, row, headers[ix.date!], parsed.message, dateText));
    }

    const replicateText = this.text(cells[ix.replicate!]);
    let replicate = 0;
    if (replicateText === '') {
      keyProblems.push(this.problem('missing-value', row, headers[ix.replicate!], 'The replicate is missing; replicates are numbered 1, 2, 3, …', ''));
    } else {
      // Consecutive rows mostly share the replicate: compare before hashing.
      if (replicateText !== this.lastReplicateText || this.lastReplicate === null) {
        this.lastReplicate = parseCached(this.replicates, replicateText, parseReplicate);
        this.lastReplicateText = replicateText;
      }
      const parsed = this.lastReplicate;
      if (parsed.ok) replicate = parsed.value;
      else keyProblems.push(this.problem(parsed.code, row, headers[ix.replicate!], parsed.message, replicateText));
    }

    const codeText = ix.code === undefined ? '' : this.text(cells[ix.code]);
    const code = codeText === '' ? null : codeText;
    const longAttribute = layout.form === 'long' ? this.requiredText(cells, 'attribute', row, keyProblems) : null;

    if (keyProblems.length > 0) {
      this.rejectRow([...keyProblems], cells, { session, dateText, assessor, product, replicateText, longAttribute, code }, out);
      return;
    }

    for (const column of this.valueColumns) {
      const header = headers[column.index];
      const attribute = column.attribute ?? longAttribute!;
      const text = this.text(cells[column.index]);
      if (text === '') {
        const cell = this.rawCell(session, dateText, assessor, product, replicateText, attribute, null, code);
        if (layout.form === 'wide') {
          this.nMissing++;
          out.push({ type: 'missing', row, column: header, cell });
        } else {
          out.push({ type: 'problem', cell, problem: this.problem('missing-value', row, header, 'The value is missing; in long form every row needs a rating (leave the row out instead).', '') });
        }
        continue;
      }
      let scale: ScaleRange | null | 'unchecked';
      if (column.attribute !== null) scale = this.scales.get(attribute)!;
      else if (attribute === this.lastScaleAttribute) scale = this.lastScale;
      else {
        // Long form: consecutive rows often share the attribute; compare before hashing.
        scale = this.scaleOf(attribute, row, headers[ix.attribute!], out);
        this.lastScaleAttribute = attribute;
        this.lastScale = scale;
      }
      const parsed = parseCached(this.values, text, this.parseValue);
      if (!parsed.ok) {
        const cell = this.rawCell(session, dateText, assessor, product, replicateText, attribute, text, code);
        out.push({ type: 'problem', cell, problem: this.problem(parsed.code, row, header, parsed.message, text) });
        continue;
      }
      const value = parsed.value;
      if (scale !== null && scale !== 'unchecked' && (value < scale.min || value > scale.max)) {
        const cell = this.rawCell(session, dateText, assessor, product, replicateText, attribute, text, code);
        out.push({ type: 'problem', cell, problem: this.outOfScale(value, scale, attribute, row, header, text) });
        continue;
      }
      out.rating(row, header, session, assessor, product, replicate, attribute, value, date, code);
    }
  }

  private outOfScale(value: number, scale: ScaleRange, attribute: string, row: number, column: string, text: string): InputProblem {
    const inScale = (v: number): boolean => v >= scale.min && v <= scale.max;
    const shifted = inScale(value / 10) ? value / 10 : inScale(value / 100) ? value / 100 : null;
    if (shifted !== null) {
      return this.problem(
        'decimal-shift',
        row,
        column,
        `${text} on a ${formatScale(scale)} scale looks like a decimal shift of ${formatNumber(shifted)}; correct the value.`,
        text,
      );
    }
    return this.problem(
      'out-of-scale',
      row,
      column,
      `${text} is outside the ${formatScale(scale)} scale of attribute "${truncateText(attribute, 60)}".`,
      text,
    );
  }

  private rawCell(
    session: string,
    date: string,
    assessor: string,
    product: string,
    replicate: string,
    attribute: string | null,
    rawValue: string | null,
    code: string | null,
  ): RawCell {
    return {
      session: session === '' ? null : session,
      date: date === '' ? null : date,
      assessor: assessor === '' ? null : assessor,
      product: product === '' ? null : product,
      replicate: replicate === '' ? null : replicate,
      attribute: attribute === '' ? null : attribute,
      rawValue: rawValue === '' ? null : rawValue,
      code,
    };
  }

  /** Report a row whose keys are bad: the first problem carries the row's non-empty value cells. */
  private rejectRow(
    problems: InputProblem[],
    cells: readonly string[],
    keys: { session: string; dateText: string; assessor: string; product: string; replicateText: string; longAttribute: string | null; code: string | null },
    out: ReadSink,
  ): void {
    const rejected: RawCell[] = [];
    for (const column of this.valueColumns) {
      const raw = cells[column.index];
      if (raw === undefined || raw.trim() === '') continue;
      const text = raw.length > this.maxCellChars ? raw.slice(0, 80) : this.text(raw);
      const attribute = column.attribute ?? keys.longAttribute;
      rejected.push(this.rawCell(keys.session, keys.dateText, keys.assessor, keys.product, keys.replicateText, attribute, text, keys.code));
    }
    problems.forEach((problem, i) => {
      if (i === 0 && rejected.length > 0) {
        const event: ReadEvent = { type: 'problem', problem, cell: rejected[0] };
        if (rejected.length > 1) event.moreCells = rejected.slice(1);
        out.push(event);
      } else {
        out.push({ type: 'problem', problem, cell: null });
      }
    });
  }
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
  const fileProblem = (code: ProblemCode, message: string, row: number | null = null, column: string | null = null): Exclude<ReadEvent, { type: 'rating' }> => ({
    type: 'problem',
    cell: null,
    problem: { code, file, row, column, message },
  });

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
      : readCsvRecords('bytes' in source ? sliceBytes(source.bytes) : byteStream(source), {
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
      for (const record of batch) {
        if (reader === null) {
          if (isBlankRecord(record.cells)) continue;
          if (record.cells.length > maxColumns) {
            sink.push(fileProblem('too-many-columns', `The header row has ${record.cells.length} columns; the most this reader accepts is ${maxColumns}.`, record.row));
            yield;
            return;
          }
          const longCell = record.cells.findIndex((c) => c.length > maxCellChars);
          if (longCell !== -1) {
            sink.push(fileProblem('cell-too-long', `Header cell ${longCell + 1} holds ${record.cells[longCell].length} characters; the most a cell may hold is ${maxCellChars}.`, record.row));
            yield;
            return;
          }
          const { layout, problems } = resolveColumnLayout(record.cells, record.row, kind === 'csv');
          if (layout === null) {
            for (const p of problems) sink.push({ type: 'problem', cell: null, problem: { ...p, file } });
            yield;
            return;
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
          if (badAttribute) {
            yield;
            return;
          }
          reader = new RowReader(file, layout, decimalMark, kind === 'csv', options, internKeys);
          if (layout.form === 'wide') reader.checkHeaderScales(record.row, out);
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
