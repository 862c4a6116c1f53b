/** What an import did, shared by the store that writes it and the pages that show it. */

/** imported: ratings written; unchanged: identical content already stored; rejected: nothing
 * written; quarantined: valid rows written, invalid cells held for correction. */
export type ImportOutcome = 'imported' | 'unchanged' | 'rejected' | 'quarantined';

export interface ImportCounts {
  /** Data rows in the file (the header is not counted). */
  rows: number;
  /** Valid ratings read from the file, exact duplicates counted once. */
  ratings: number;
  missingCells: number;
  /** Sessions named in the file. */
  sessions: number;
  sessionsNew: number;
  sessionsReplaced: number;
  sessionsUnchanged: number;
  /** Stored values replaced or removed (each kept in the correction history). */
  valuesReplaced: number;
  /** Cells held in quarantine. */
  quarantined: number;
}

/** One panel's contents at a glance (home page). */
export interface PanelSummary {
  name: string;
  nSessions: number;
  nAssessors: number;
  nProducts: number;
  nAttributes: number;
  nRatings: number;
  nImports: number;
  /** Quarantined cells still waiting for correction. */
  nQuarantineHeld: number;
  firstSessionDate: string | null;
  lastSessionDate: string | null;
}

/** One import as the imports list shows it. */
export interface ImportSummary {
  importId: number;
  panel: string;
  fileName: string;
  sha256: string;
  source: 'cli' | 'http' | 'web';
  startedAt: string;
  finishedAt: string | null;
  outcome: ImportOutcome;
  nRows: number;
  nRatings: number;
  nSessions: number;
  nReplaced: number;
  nQuarantined: number;
  nErrors: number;
}

/** One session's counts (panel page). */
export interface SessionCounts {
  label: string;
  date: string;
  dataVersion: number;
  nAssessors: number;
  nProducts: number;
  nAttributes: number;
  /** Highest replicate number rated in the session. */
  nReplicates: number;
  nRatings: number;
}
