import { Transform, type Readable } from 'node:stream';
import type { SourceRecord } from './csv-records.js';
import { SourceFailure } from './source-failure.js';
import { budgetFor, DEFAULT_MAX_EXPANDED_BYTES, watchUnzip, type XlsxLimits } from './xlsx-budget.js';

export interface XlsxRecordOptions {
  /** Sheet to read, by name (compared trimmed, case-insensitively); the first sheet when absent. */
  sheet?: string;
  /** Give up when the workbook reader makes no progress (no bytes read, no row) for this long. */
  stallTimeoutMs: number;
  /** Checked while unzipping (ingest/xlsx-budget.ts); unzipped size defaults to 200 MB. */
  limits?: Partial<XlsxLimits> & Pick<XlsxLimits, 'maxCellChars'>;
}

const UNREADABLE_WORKBOOK =
  'The .xlsx file could not be read (the workbook is damaged or not an Excel workbook). Save it again from the spreadsheet program, or export it as CSV.';

/**
 * Pull the next item, failing when nothing moves for `stallTimeoutMs`. Some damaged zip
 * entries leave exceljs's unzip stage waiting forever; progress is any byte read or row made.
 */
async function nextOrStall<T>(iterator: AsyncIterator<T>, progress: { at: number }, stallTimeoutMs: number, overBudget: Promise<never>): Promise<IteratorResult<T>> {
  let timer: NodeJS.Timeout | undefined;
  const stalled = new Promise<never>((_, reject) => {
    const check = (): void => {
      const idleMs = Date.now() - progress.at;
      if (idleMs >= stallTimeoutMs) reject(new SourceFailure('file-unreadable', UNREADABLE_WORKBOOK, null, null, true));
      else timer = setTimeout(check, stallTimeoutMs - idleMs);
    };
    timer = setTimeout(check, stallTimeoutMs);
  });
  try {
    return await Promise.race([iterator.next(), stalled, overBudget]);
  } finally {
    clearTimeout(timer);
  }
}

/**
 * Records of a re-readable source, read again once if the first reading fails in a way that may
 * not repeat. exceljs's streaming reader fails at random on valid workbooks: it can hang (a
 * race in its stream iteration, upstream exceljs issue #1558), which the stall timeout turns
 * into a failure, and about one reading in several hundred throws from inside the library
 * (`Cannot read properties of undefined (reading 'sheets')` when workbook.xml's model is not
 * ready as the deferred worksheet is parsed). A damaged file fails again and is reported
 * then. Batches already handed on are not repeated: the second reading skips them, checking
 * that their row numbers match.
 */
export async function* withOneRetryOnTransientFailure(open: () => AsyncGenerator<SourceRecord[]>): AsyncGenerator<SourceRecord[]> {
  const handedOn: number[] = [];
  try {
    for await (const batch of open()) {
      handedOn.push(batch.length > 0 ? batch[0].row : -1);
      yield batch;
    }
    return;
  } catch (error) {
    if (!(error instanceof SourceFailure && error.transient)) throw error;
  }
  let index = 0;
  for await (const batch of open()) {
    if (index < handedOn.length) {
      if ((batch.length > 0 ? batch[0].row : -1) !== handedOn[index]) throw new SourceFailure('file-unreadable', UNREADABLE_WORKBOOK);
      index += 1;
      continue;
    }
    yield batch;
  }
  if (index < handedOn.length) throw new SourceFailure('file-unreadable', UNREADABLE_WORKBOOK);
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
 * Stream the rows of one worksheet (as batches of one) of an .xlsx workbook with exceljs's streaming reader.
 * Row numbers are the sheet's own (header = the first non-empty row); missing rows are
 * skipped, as a spreadsheet shows them empty. Throws SourceFailure('sheet-missing') when
 * the named sheet is absent and 'file-unreadable' for a damaged workbook.
 */
export async function* readXlsxRecords(input: Readable, options: XlsxRecordOptions): AsyncGenerator<SourceRecord[]> {
  const progress = { at: Date.now() };
  const counted = input.pipe(
    new Transform({
      transform(chunk, _encoding, done) {
        progress.at = Date.now();
        done(null, chunk);
      },
    }),
  );
  input.on('error', (error) => counted.destroy(error));
  watchUnzip();
  const budget = budgetFor(counted, {
    maxExpandedBytes: options.limits?.maxExpandedBytes ?? DEFAULT_MAX_EXPANDED_BYTES,
    maxCellChars: options.limits?.maxCellChars ?? 10_000,
  });
  const nextOf = <T>(iterator: AsyncIterator<T>) => nextOrStall(iterator, progress, options.stallTimeoutMs, budget.failed);
  // Loaded on first use: exceljs costs about 0.3 s of start-up that CSV imports and every CLI
  // command would otherwise pay.
  const { default: ExcelJS } = await import('exceljs');
  const reader = new ExcelJS.stream.xlsx.WorkbookReader(counted, {
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
  const sheets = reader[Symbol.asyncIterator]();
  try {
    for (;;) {
      const nextSheet = await nextOf(sheets);
      if (nextSheet.done) break;
      const worksheet = nextSheet.value;
      progress.at = Date.now();
      const name = String((worksheet as unknown as { name?: string }).name ?? '');
      seen.push(name);
      const rows = worksheet[Symbol.asyncIterator]();
      if (wanted !== undefined && name.trim().toLowerCase() !== wanted) {
        // Drain sheets that are not read so the zip stream moves on.
        while (!(await nextOf(rows)).done) progress.at = Date.now();
        continue;
      }
      found = true;
      for (;;) {
        const next = await nextOf(rows);
        if (next.done) break;
        const values = next.value.values as unknown[];
        const cells: string[] = new Array(Math.max(0, values.length - 1));
        for (let i = 1; i < values.length; i++) cells[i - 1] = xlsxCellText(values[i]);
        yield [{ row: next.value.number, cells }];
        progress.at = Date.now();
      }
      break;
    }
  } catch (error) {
    // A limit passed while unzipping: exceljs then fails too, but the limit is the reason.
    if (budget.failedWith !== null) throw budget.failedWith;
    if (error instanceof SourceFailure) throw error;
    // An exception from inside exceljs: a damaged workbook, or the library's own race.
    throw new SourceFailure('file-unreadable', UNREADABLE_WORKBOOK, null, null, true);
  } finally {
    input.destroy();
    counted.destroy();
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
