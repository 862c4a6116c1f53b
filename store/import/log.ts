/**
 * The import log: earlier imports of the same content, and the record of an attempt that wrote
 * no ratings (rejected, or unchanged content) with its report.
 */
import type { Database } from 'better-sqlite3';
import type { ImportReport, ResolvedRequest } from './types.js';
import { emptyCounts, plural, type ImportTally } from './tally.js';

/** Looks for an earlier import of the same content into the same panel that wrote something. */
export function findEarlierImport(db: Database, panel: string, sha256: string): { id: number; startedAt: string } | undefined {
  return db
    .prepare(
      `SELECT i.id, i.started_at AS startedAt FROM import i JOIN panel p ON p.id = i.panel_id
       WHERE p.name = ? AND i.content_sha256 = ? AND i.outcome IN ('imported', 'quarantined')
       ORDER BY i.id DESC LIMIT 1`,
    )
    .get(panel, sha256) as { id: number; startedAt: string } | undefined;
}

/**
 * The answer for content already imported into the panel: nothing is written but the attempt,
 * so the imports page can show it.
 */
export function unchangedReport(db: Database, request: ResolvedRequest, earlier: { id: number; startedAt: string }): ImportReport {
  const base: Omit<ImportReport, 'importId'> = {
    ok: true,
    outcome: 'unchanged',
    panel: request.panel,
    fileName: request.fileName,
    sha256: request.sha256,
    counts: emptyCounts(),
    changedSessions: [],
    findings: [],
    errors: [],
    totalErrors: 0,
    message: `${request.fileName} has the same content as import #${earlier.id} of ${earlier.startedAt.slice(0, 10)} into panel "${request.panel}"; nothing changed.`,
  };
  return { ...base, importId: recordAttempt(db, request, base) as number };
}

/** The answer when problems stop the import: nothing of the ratings is written, the attempt is logged. */
export function rejectedReport(db: Database, request: ResolvedRequest, tally: ImportTally): ImportReport {
  const { fileName } = request;
  const { totalErrors } = tally;
  const base = {
    ok: false,
    outcome: 'rejected' as const,
    panel: request.panel,
    fileName,
    sha256: request.sha256,
    counts: { ...tally.counts, sessionsNew: 0, sessionsReplaced: 0, sessionsUnchanged: 0, valuesReplaced: 0, quarantined: 0 },
    changedSessions: [],
    findings: tally.findings,
    errors: tally.errors,
    totalErrors,
    message: `${fileName} was not imported: ${plural(totalErrors, 'problem')} found, nothing was written; correct ${totalErrors === 1 ? 'it' : 'them'} and import again${tally.unquarantinableErrors === 0 ? ', or use quarantine to store the valid rows' : ''}.`,
  };
  const importId = recordAttempt(db, request, base);
  return { ...base, importId };
}

/**
 * Records an attempt that wrote no ratings (rejected, or unchanged content) in the import log.
 * The log belongs to a panel (every import row names one), so a rejected import into a panel
 * the store does not have yet is not logged at all: creating the panel only to log the rejection
 * would leave an empty panel behind, and a rejection writes nothing. The person still gets the
 * whole answer (problems by file, row and column); the returned id is then null.
 */
export function recordAttempt(db: Database, request: ResolvedRequest, report: Omit<ImportReport, 'importId'>): number | null {
  const now = (request.now ?? (() => new Date()))().toISOString();
  return db.transaction((): number | null => {
    const panel = db.prepare('SELECT id FROM panel WHERE name = ?').get(request.panel) as { id: number } | undefined;
    if (panel === undefined && report.outcome === 'rejected') return null;
    const panelId = panel?.id ?? ensurePanel(db, request.panel, now);
    const info = db
      .prepare(
        `INSERT INTO import (panel_id, file_name, content_sha256, source, started_at, finished_at, outcome,
           n_rows, n_ratings, n_sessions, n_replaced, n_quarantined, n_errors, report_json)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, 0, 0, ?, ?)`,
      )
      .run(panelId, request.fileName, request.sha256, request.source, now, now, report.outcome, report.counts.rows, report.counts.ratings, report.counts.sessions, report.totalErrors, '{}');
    const importId = Number(info.lastInsertRowid);
    db.prepare('UPDATE import SET report_json = ? WHERE id = ?').run(JSON.stringify({ ...report, importId }), importId);
    return importId;
  }).immediate();
}

export function ensurePanel(db: Database, name: string, nowIso: string): number {
  db.prepare('INSERT INTO panel (name, created_at) VALUES (?, ?) ON CONFLICT (name) DO NOTHING').run(name, nowIso);
  return (db.prepare('SELECT id FROM panel WHERE name = ?').get(name) as { id: number }).id;
}
