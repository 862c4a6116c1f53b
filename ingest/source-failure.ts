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
    /**
     * The failure may not repeat on a second reading of the same bytes: the reader stopped
     * making progress (a timeout) or the workbook library threw from inside itself, rather
     * than our own checks finding the bytes invalid.
     */
    readonly transient = false,
  ) {
    super(message);
    this.name = 'SourceFailure';
  }
}
