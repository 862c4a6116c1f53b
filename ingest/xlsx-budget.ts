/**
 * Limits on what an .xlsx file may expand to, checked while exceljs unzips it, chunk by chunk,
 * before its XML parser holds anything: the total size of the unzipped parts and the length of
 * any one cell's text. A zip of a few hundred kilobytes can hold a single cell of hundreds of
 * megabytes (deflate compresses repeated text about 1000:1); read whole, it costs seconds and
 * that much memory before any check after parsing could see it.
 *
 * exceljs's streaming reader takes the zip stream and unzips it itself (with unzipper), so
 * the count is made on each unzipped entry as exceljs's unzipper produces it: `watchUnzip`
 * wraps unzipper's `Parse` once (the copy exceljs loads) and attaches a budget to the parse
 * streams whose source was registered with `budgetFor`. Other readers are not affected.
 */
import { createRequire } from 'node:module';
import type { Readable, Transform } from 'node:stream';
import { SourceFailure } from './source-failure.js';

export interface XlsxLimits {
  /** Total of all unzipped parts, in bytes. */
  maxExpandedBytes: number;
  /** Characters of one cell's text (an XML character reference counts as one). */
  maxCellChars: number;
}

/** 200 MB unzipped: a year of a large panel in wide form is about 40 MB of sheet XML. */
export const DEFAULT_MAX_EXPANDED_BYTES = 200 * 1024 * 1024;

const formatMegabytes = (bytes: number): string => `${Number((bytes / (1024 * 1024)).toFixed(1))} MB`;

interface ZipEntry extends Transform {
  path: string;
}

/**
 * Counts one workbook's unzipped bytes and, in its XML parts, the characters since the last
 * tag (a cell's text is the longest stretch without markup; a tag is short), remembering the
 * last cell reference (`<c r="B7"`) and shared-string number for the message.
 */
export class XlsxBudget {
  expandedBytes = 0;
  private failure: SourceFailure | null = null;
  private rejectFailed: (error: SourceFailure) => void = () => {};
  /** Rejects when a limit is passed; the reader races it against the next row. */
  readonly failed: Promise<never>;

  constructor(readonly limits: XlsxLimits) {
    this.failed = new Promise<never>((_, reject) => {
      this.rejectFailed = reject;
    });
    this.failed.catch(() => {}); // observed by the reader's race; never an unhandled rejection
  }

  get failedWith(): SourceFailure | null {
    return this.failure;
  }

  fail(failure: SourceFailure): SourceFailure {
    if (this.failure === null) {
      this.failure = failure;
      this.rejectFailed(failure);
    }
    return this.failure;
  }

  /** Wraps the entry's pass-through step: every unzipped chunk is counted before it moves on. */
  watchEntry(entry: ZipEntry): void {
    const isXml = /\.xml$/i.test(entry.path);
    const isSharedStrings = /sharedStrings\d*\.xml$/i.test(entry.path);
    const scan = isXml ? new TextRunScanner(this.limits.maxCellChars, isSharedStrings) : null;
    const passOn = entry._transform.bind(entry);
    // The failure reaches the reader through `failed`; exceljs pipes some entries to a temporary
    // file without listening for errors, which would otherwise end the process.
    entry.on('error', () => {});
    entry._transform = (chunk: Buffer, encoding: BufferEncoding, callback: (error?: Error | null, data?: unknown) => void) => {
      if (this.failure !== null) return callback(this.failure);
      this.expandedBytes += chunk.length;
      if (this.expandedBytes > this.limits.maxExpandedBytes) {
        return callback(
          this.fail(
            new SourceFailure(
              'file-too-large',
              `The workbook expands to more than ${formatMegabytes(this.limits.maxExpandedBytes)} when unzipped, the most this reader accepts. Save the ratings as CSV, or split them into smaller workbooks.`,
            ),
          ),
        );
      }
      const tooLong = scan?.push(chunk);
      if (tooLong) {
        const where = tooLong.cell !== null ? `Cell ${tooLong.cell}` : tooLong.sharedString !== null ? `A text cell (shared string ${tooLong.sharedString})` : 'A cell';
        return callback(
          this.fail(
            new SourceFailure(
              'cell-too-long',
              `${where} holds more than ${this.limits.maxCellChars.toLocaleString('en-US')} characters, the most a cell may hold. The workbook was not read further.`,
              tooLong.cell !== null ? Number(/\d+$/.exec(tooLong.cell)?.[0]) : null,
            ),
          ),
        );
      }
      passOn(chunk, encoding, callback);
    };
  }
}

const LT = 0x3c;
const GT = 0x3e;
const AMP = 0x26;
const SEMI = 0x3b;
/** Longest XML character reference (`&#x10FFFF;`); a longer `&` run is counted as text. */
const MAX_REFERENCE_BYTES = 10;
const TAG_HEAD_BYTES = 96;

/**
 * Characters since the last tag boundary, across chunks (a tag's own characters count too, so
 * a huge attribute or CDATA section is caught as well); UTF-8 continuation bytes do not count.
 */
class TextRunScanner {
  private run = 0;
  private referenceBytes = -1;
  private inTag = false;
  private readonly tagHead = Buffer.alloc(TAG_HEAD_BYTES);
  private tagLength = 0;
  private cell: string | null = null;
  private sharedStrings = 0;

  constructor(
    private readonly maxChars: number,
    private readonly countSharedStrings: boolean,
  ) {}

  push(chunk: Buffer): { cell: string | null; sharedString: number | null } | null {
    const max = this.maxChars;
    for (let i = 0; i < chunk.length; i++) {
      const byte = chunk[i];
      if (byte === LT) {
        this.run = 0;
        this.referenceBytes = -1;
        this.inTag = true;
        this.tagLength = 0;
        continue;
      }
      if (this.inTag) {
        if (byte === GT) {
          // The text after a tag starts here (a ">" inside text does not end a run).
          this.inTag = false;
          this.noteTag();
          this.run = 0;
          this.referenceBytes = -1;
          continue;
        }
        if (this.tagLength < TAG_HEAD_BYTES) this.tagHead[this.tagLength++] = byte;
      }
      if (this.referenceBytes >= 0) {
        this.referenceBytes += 1;
        if (byte === SEMI || this.referenceBytes > MAX_REFERENCE_BYTES) this.referenceBytes = -1;
        continue;
      }
      if (byte === AMP) this.referenceBytes = 0;
      if ((byte & 0xc0) !== 0x80 && ++this.run > max) {
        return { cell: this.countSharedStrings ? null : this.cell, sharedString: this.countSharedStrings ? this.sharedStrings : null };
      }
    }
    return null;
  }

  /** `<c r="B7" …>` sets the cell; `<si>` starts the next shared string. */
  private noteTag(): void {
    const head = this.tagHead;
    if (this.tagLength >= 2 && head[0] === 0x63 /* c */ && (head[1] === 0x20 || head[1] === 0x09 || head[1] === 0x0a || head[1] === 0x0d)) {
      const match = / r="([A-Z]{1,3}[0-9]{1,7})"/.exec(head.toString('latin1', 0, this.tagLength));
      this.cell = match ? match[1] : null;
    } else if (this.countSharedStrings && this.tagLength >= 2 && head[0] === 0x73 /* s */ && head[1] === 0x69 /* i */ && (this.tagLength === 2 || head[2] === 0x20)) {
      this.sharedStrings += 1;
    }
  }
}

/** Budgets of the streams handed to exceljs, looked up when exceljs pipes one into unzipper. */
const budgetOfSource = new WeakMap<Readable, XlsxBudget>();
let unzipWatched = false;

/**
 * Once per process: make unzipper's `Parse` (the copy exceljs requires) look up the budget of
 * the stream piped into it and watch each entry it pushes, before any byte of that entry moves.
 */
export function watchUnzip(): void {
  if (unzipWatched) return;
  const requireFromExcelJs = createRequire(createRequire(import.meta.url).resolve('exceljs'));
  const unzipper = requireFromExcelJs('unzipper') as { Parse: (options?: object) => Transform };
  const originalParse = unzipper.Parse;
  unzipper.Parse = function watchedParse(options?: object): Transform {
    const parse = originalParse(options);
    parse.once('pipe', (source: Readable) => {
      const budget = budgetOfSource.get(source);
      if (budget === undefined) return;
      const push = parse.push.bind(parse);
      parse.push = (item: unknown, encoding?: BufferEncoding): boolean => {
        if (item !== null && typeof item === 'object' && typeof (item as ZipEntry).path === 'string' && typeof (item as ZipEntry)._transform === 'function') {
          budget.watchEntry(item as ZipEntry);
        }
        return push(item, encoding);
      };
    });
    return parse;
  };
  unzipWatched = true;
}

/** Registers the stream that will be piped into exceljs's unzipper; returns its budget. */
export function budgetFor(source: Readable, limits: XlsxLimits): XlsxBudget {
  const budget = new XlsxBudget(limits);
  budgetOfSource.set(source, budget);
  return budget;
}
