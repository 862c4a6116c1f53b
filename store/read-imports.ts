/** Read queries for the imports list, one import's page, and its quarantined cells. */
import type { Database } from 'better-sqlite3';
import type { QuarantineListRow } from '../domain/problems.js';
import type { ImportSummary } from '../domain/imports.js';

export type ImportRow = ImportSummary;

const IMPORT_COLUMNS = `i.id AS importId, p.name AS panel, i.file_name AS fileName, i.content_sha256 AS sha256,
  i.source AS source, i.started_at AS startedAt, i.finished_at AS finishedAt, i.outcome AS outcome,
  i.n_rows AS nRows, i.n_ratings AS nRatings, i.n_sessions AS nSessions, i.n_replaced AS nReplaced,
  i.n_quarantined AS nQuarantined, i.n_errors AS nErrors`;

/** Imports, newest first; of one panel when a name is given. At most `limit` rows. */
export function readImportRows(db: Database, options: { panelName?: string; limit: number }): ImportRow[] {
  if (options.panelName !== undefined) {
    return db
      .prepare(`SELECT ${IMPORT_COLUMNS} FROM import i JOIN panel p ON p.id = i.panel_id WHERE p.name = ? ORDER BY i.id DESC LIMIT ?`)
      .all(options.panelName, options.limit) as ImportRow[];
  }
  return db
    .prepare(`SELECT ${IMPORT_COLUMNS} FROM import i JOIN panel p ON p.id = i.panel_id ORDER BY i.id DESC LIMIT ?`)
    .all(options.limit) as ImportRow[];
}

/** Total number of imports (of one panel when a name is given). */
export function countImports(db: Database, panelName?: string): number {
  const row =
    panelName !== undefined
      ? db.prepare('SELECT COUNT(*) AS n FROM import i JOIN panel p ON p.id = i.panel_id WHERE p.name = ?').get(panelName)
      : db.prepare('SELECT COUNT(*) AS n FROM import').get();
  return (row as { n: number }).n;
}

export interface ImportDetailRow extends ImportRow {
  /** The full answer given when the import ran (counts, findings, first errors), as stored. */
  reportJson: string;
}

/** One import, or null. */
export function readImportDetail(db: Database, importId: number): ImportDetailRow | null {
  const row = db
    .prepare(`SELECT ${IMPORT_COLUMNS}, i.report_json AS reportJson FROM import i JOIN panel p ON p.id = i.panel_id WHERE i.id = ?`)
    .get(importId) as ImportDetailRow | undefined;
  return row ?? null;
}

export type QuarantineRow = QuarantineListRow;

/** Cells an import put in quarantine, in file order; at most `limit`. */
export function readImportQuarantine(db: Database, importId: number, limit: number): QuarantineRow[] {
  return db
    .prepare(
      `SELECT id AS quarantineId, row_number AS rowNumber, column_name AS column, session_label AS session,
         session_date AS date, assessor, product, replicate, attribute, raw_value AS rawValue,
         reason_code AS reasonCode, reason, status
       FROM quarantine WHERE import_id = ? ORDER BY row_number, id LIMIT ?`,
    )
    .all(importId, limit) as QuarantineRow[];
}
