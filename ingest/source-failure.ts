import type { ProblemCode } from '../domain/problems.js';

/**
 * A whole-file failure found while reading bytes or records (bad encoding, broken quoting,
 * unreadable workbook). Thrown by the record sources and turned into one problem by
 * readRatings; never shown to people as an exception.
 */
export class SourceFailure extends Error {
  constructor(
    readonly code: ProblemCode,
    message: string,
    /** Spreadsheet row (header = 1) when known. */
    readonly row: number | null = null,
    readonly column: string | null = null,
    /** The reader stopped making progress (a timeout), rather than finding the bytes invalid. */
    readonly stalled = false,
  ) {
    super(message);
    this.name = 'SourceFailure';
  }
}
