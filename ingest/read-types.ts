/**
 * The reader's input, options, events and sink: shared by the row reader (row-reader.ts), the
 * file-level reading (read-ratings.ts) and the compact batches of the import (compact-batches.ts).
 */
import type { InputFinding, InputProblem, RawCell } from '../domain/problems.js';
import type { Rating, ScaleRange } from '../domain/ratings.js';

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

export type ReadEvent =
  /** row as a spreadsheet shows it (header = 1); column = header of the value cell. */
  | { type: 'rating'; row: number; column: string; rating: Rating }
  /** An empty value cell in wide form: a missing rating, not an error. */
  | { type: 'missing'; row: number; column: string; cell: RawCell }
  /** Blocking. `cell` (and `moreCells`) are the value cells this problem rejects; see the module comment. */
  | { type: 'problem'; problem: InputProblem; cell: RawCell | null; moreCells?: RawCell[] }
  /** Not blocking. */
  | { type: 'finding'; finding: InputFinding };
