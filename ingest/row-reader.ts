/**
 * The row reader: validates one data row at a time against the resolved header (keys, dates,
 * replicates, values against their scales, names) and puts its ratings, missing cells, problems
 * and findings into the sink. Created by read-ratings.ts once the header row is resolved.
 */
import type { InputProblem, ProblemCode, RawCell } from '../domain/problems.js';
import type { ScaleRange } from '../domain/ratings.js';
import { parseRatingValue, parseReplicate, parseSessionDate, type CellResult, type DecimalMark } from './cells.js';
import type { SourceRecord } from './csv-records.js';
import { truncateText, type ColumnLayout } from './headers.js';
import { checkName, showHidden, type NameCheck } from './names.js';
import type { ReadEvent, ReadRatingsOptions, ReadSink } from './read-types.js';
import { cellText, formatNumber, formatScale, KEY_ROLE_INDEX, KEY_ROLE_NAMES, KEY_ROLES, MAX_CACHED_TEXTS, oneYearAfter, parseCached, type KeyRole } from './row-cells.js';

export const DEFAULT_MAX_COLUMNS = 2000;
export const DEFAULT_MAX_CELL_CHARS = 10_000;

/** Row reader state for one file; created after the header row is resolved. */
export class RowReader {
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
  /** checkName for each key role, made once (not a closure per new text). */
  private readonly nameCheckers: ((text: string) => NameCheck)[] = KEY_ROLE_NAMES.map((role) => (text: string) => checkName(text, role));
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
    const check = parseCached(this.nameChecks[roleIndex], text, this.nameCheckers[roleIndex]);
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
    // Index loops in the per-row code: a for-of allocates an iterator result per step until the
    // function is compiled, and a year's first rows all run before that.
    const unnamedColumns = layout.unnamedColumns;
    for (let u = 0; u < unnamedColumns.length; u++) {
      const i = unnamedColumns[u];
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

    const valueColumns = this.valueColumns;
    for (let v = 0; v < valueColumns.length; v++) {
      const column = valueColumns[v];
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
