/**
 * Problems (blocking) and findings (worth a look, not blocking) found while reading
 * and validating an input file. Every one names where it is: file, the row number as a
 * spreadsheet shows it (header row = 1), and the column header as written in the file.
 */
export type ProblemCode =
  | 'file-empty'
  | 'file-unreadable'
  | 'file-too-large'
  | 'encoding'
  | 'header-missing-column'
  | 'header-duplicate-column'
  | 'header-unknown-column'
  | 'row-field-count'
  | 'missing-value'
  | 'not-a-number'
  | 'not-finite'
  | 'replicate-not-positive-integer'
  | 'invalid-date'
  | 'out-of-scale'
  | 'decimal-shift'
  | 'conflicting-duplicate'
  | 'session-date-conflict'
  | 'scale-missing'
  | 'sheet-missing'
  | 'too-many-columns'
  | 'cell-too-long'
  | 'name-invalid';

export interface InputProblem {
  code: ProblemCode;
  file: string;
  /** Row as a spreadsheet shows it (header = 1); null for whole-file problems. */
  row: number | null;
  /** Column header as written in the file; null when no single column is at fault. */
  column: string | null;
  /** One plain sentence that says what is wrong and how to fix it. */
  message: string;
  /** The offending cell text, when there is one (truncated to 80 characters). */
  value?: string | null;
}

export type FindingCode =
  | 'duplicate-row'
  | 'decimal-shift'
  | 'missing-cells'
  | 'identifier-case'
  | 'future-date';

/** A non-blocking observation about the data (reported with the import, becomes a flag later). */
export interface InputFinding {
  code: FindingCode;
  file: string;
  row: number | null;
  column: string | null;
  message: string;
  session?: string | null;
  assessor?: string | null;
  product?: string | null;
  attribute?: string | null;
}

/** The identifying text of one cell as read from a file (trimmed; formula prefix removed). */
export interface CellText {
  session: string | null;
  date: string | null;
  assessor: string | null;
  product: string | null;
  replicate: string | null;
  attribute: string | null;
  rawValue: string | null;
}

/** A cell as read, for the quarantine. */
export interface RawCell extends CellText {
  code: string | null;
}

/** One held (quarantined) cell as the import pages list it. */
export interface QuarantineListRow extends CellText {
  quarantineId: number;
  rowNumber: number | null;
  column: string | null;
  reasonCode: string;
  reason: string;
  status: 'held' | 'released' | 'discarded';
}

/** Cap on listed problems; the total is always reported. */
export const MAX_LISTED_PROBLEMS = 100;
