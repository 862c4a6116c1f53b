/**
 * Stored analysis results: per-session fits, indices and quality findings (written together,
 * in one transaction, with the session's data version) and period fits per attribute window.
 * JSON payloads are stored as produced by analysis/ and returned parsed; this module does not
 * interpret them beyond their keys.
 */
import type { Database } from 'better-sqlite3';
import type { FitJson, SessionFitFinding, StoredPeriodResult } from '../domain/analysis.js';
import type { AssessorSessionIndices } from '../analysis/indices/types.js';

export interface AttributeFitResult {
  attributeId: number;
  /** null when the attribute could not be fitted this session (e.g. constant ratings). */
  fit: FitJson | null;
  diagnostics: unknown;
  indices: AssessorSessionIndices[];
}

export interface SessionResults {
  sessionId: number;
  dataVersion: number;
  analysisVersion: string;
  attributes: AttributeFitResult[];
  /** The fits of the session that could not be made, with the reason. */
  findings: SessionFitFinding[];
}

/** Replace everything stored for a session with a new set of results (one transaction). */
export function saveSessionResults(db: Database, results: SessionResults, fittedAt = new Date().toISOString()): void {
  const deleteFits = db.prepare('DELETE FROM session_fit WHERE session_id = ?');
  const deleteIndices = db.prepare('DELETE FROM session_indices WHERE session_id = ?');
  const insertFit = db.prepare(
    `INSERT INTO session_fit (session_id, attribute_id, data_version, analysis_version, fit_json, diagnostics_json, fitted_at)
     VALUES (?, ?, ?, ?, ?, ?, ?)`,
  );
  const insertIndices = db.prepare(
    `INSERT INTO session_indices (session_id, attribute_id, data_version, analysis_version, indices_json, computed_at)
     VALUES (?, ?, ?, ?, ?, ?)`,
  );
  const upsertQuality = db.prepare(
    `INSERT INTO session_quality (session_id, data_version, analysis_version, findings_json, computed_at)
     VALUES (?, ?, ?, ?, ?)
     ON CONFLICT (session_id) DO UPDATE SET data_version = excluded.data_version,
       analysis_version = excluded.analysis_version, findings_json = excluded.findings_json,
       computed_at = excluded.computed_at`,
  );
  db.transaction(() => {
    deleteFits.run(results.sessionId);
    deleteIndices.run(results.sessionId);
    for (const a of results.attributes) {
      if (a.fit) {
        insertFit.run(
          results.sessionId,
          a.attributeId,
          results.dataVersion,
          results.analysisVersion,
          JSON.stringify(a.fit),
          JSON.stringify(a.diagnostics ?? {}),
          fittedAt,
        );
      }
      insertIndices.run(results.sessionId, a.attributeId, results.dataVersion, results.analysisVersion, JSON.stringify(a.indices), fittedAt);
    }
    upsertQuality.run(results.sessionId, results.dataVersion, results.analysisVersion, JSON.stringify(results.findings), fittedAt);
  })();
}

export interface StoredSessionFit {
  session: string;
  sessionDate: string;
  attribute: string;
  dataVersion: number;
  analysisVersion: string;
  fittedAt: string;
  fit: FitJson;
  diagnostics: unknown;
}

/** All stored session fits of a panel in session order (optionally one attribute). */
export function loadSessionFits(db: Database, panelId: number, attribute?: string): StoredSessionFit[] {
  const rows = db
    .prepare(
      `SELECT s.label AS session, s.session_date AS sessionDate, at.name AS attribute, f.data_version AS dataVersion,
              f.analysis_version AS analysisVersion, f.fitted_at AS fittedAt, f.fit_json AS fitJson,
              f.diagnostics_json AS diagnosticsJson
         FROM session_fit f JOIN session s ON s.id = f.session_id JOIN attribute at ON at.id = f.attribute_id
        WHERE s.panel_id = ? AND (? IS NULL OR at.name = ?)
        ORDER BY s.session_date, s.label, at.name`,
    )
    .all(panelId, attribute ?? null, attribute ?? null) as (Omit<StoredSessionFit, 'fit' | 'diagnostics'> & {
    fitJson: string;
    diagnosticsJson: string;
  })[];
  return rows.map(({ fitJson, diagnosticsJson, ...rest }) => ({ ...rest, fit: JSON.parse(fitJson), diagnostics: JSON.parse(diagnosticsJson) }));
}

/** All stored per-assessor indices of a panel, flattened, in session order. */
export function loadSessionIndices(db: Database, panelId: number): AssessorSessionIndices[] {
  const rows = db
    .prepare(
      `SELECT i.indices_json AS json FROM session_indices i JOIN session s ON s.id = i.session_id
        JOIN attribute at ON at.id = i.attribute_id
        WHERE s.panel_id = ? ORDER BY s.session_date, s.label, at.name`,
    )
    .all(panelId) as { json: string }[];
  return rows.flatMap((r) => JSON.parse(r.json) as AssessorSessionIndices[]);
}

export interface StoredQuality {
  session: string;
  dataVersion: number;
  findings: SessionFitFinding[];
}

export function loadSessionQuality(db: Database, panelId: number): StoredQuality[] {
  const rows = db
    .prepare(
      `SELECT s.label AS session, q.data_version AS dataVersion, q.findings_json AS json
         FROM session_quality q JOIN session s ON s.id = q.session_id
        WHERE s.panel_id = ? ORDER BY s.session_date, s.label`,
    )
    .all(panelId) as { session: string; dataVersion: number; json: string }[];
  return rows.map((r) => ({ session: r.session, dataVersion: r.dataVersion, findings: JSON.parse(r.json) }));
}

export type { StoredPeriodResult };

/** Sessions of one window with the data versions used, as stored in sessions_json. */
export type WindowSignature = [label: string, dataVersion: number][];

export interface PeriodFitRecord {
  attributeId: number;
  windowSessions: number;
  firstSessionId: number;
  lastSessionId: number;
  sessions: WindowSignature;
  analysisVersion: string;
  /** The period fit with its product:session likelihood-ratio test, or why there is none. */
  result: StoredPeriodResult;
}

export function savePeriodFit(db: Database, panelId: number, record: PeriodFitRecord, fittedAt = new Date().toISOString()): void {
  db.prepare(
    `INSERT INTO period_fit (panel_id, attribute_id, window_sessions, first_session_id, last_session_id, sessions_json,
                             analysis_version, result_json, fitted_at)
     VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)
     ON CONFLICT (panel_id, attribute_id, window_sessions, last_session_id) DO UPDATE SET
       first_session_id = excluded.first_session_id, sessions_json = excluded.sessions_json,
       analysis_version = excluded.analysis_version, result_json = excluded.result_json, fitted_at = excluded.fitted_at`,
  ).run(
    panelId,
    record.attributeId,
    record.windowSessions,
    record.firstSessionId,
    record.lastSessionId,
    JSON.stringify(record.sessions),
    record.analysisVersion,
    JSON.stringify(record.result),
    fittedAt,
  );
}

/** The stored signature (sessions_json + analysis version) of every period fit, keyed by attribute id and last session id. */
export function loadPeriodSignatures(db: Database, panelId: number, windowSessions: number): Map<string, string> {
  const rows = db
    .prepare(
      `SELECT attribute_id AS attributeId, last_session_id AS lastSessionId, sessions_json AS sessionsJson,
              analysis_version AS analysisVersion
         FROM period_fit WHERE panel_id = ? AND window_sessions = ?`,
    )
    .all(panelId, windowSessions) as { attributeId: number; lastSessionId: number; sessionsJson: string; analysisVersion: string }[];
  return new Map(rows.map((r) => [`${r.attributeId}:${r.lastSessionId}`, `${r.analysisVersion}|${r.sessionsJson}`]));
}

/** Period fits whose window no longer exists (sessions removed, window size changed) are dropped. */
export function deletePeriodFitsExcept(db: Database, panelId: number, windowSessions: number, keepLastSessionIds: number[]): number {
  const keep = new Set(keepLastSessionIds);
  const rows = db.prepare('SELECT id, last_session_id AS last, window_sessions AS w FROM period_fit WHERE panel_id = ?').all(panelId) as {
    id: number;
    last: number;
    w: number;
  }[];
  const del = db.prepare('DELETE FROM period_fit WHERE id = ?');
  let n = 0;
  for (const r of rows) {
    if (r.w !== windowSessions || !keep.has(r.last)) {
      del.run(r.id);
      n += 1;
    }
  }
  return n;
}

export interface StoredPeriodFit {
  attribute: string;
  windowSessions: number;
  firstSession: string;
  lastSession: string;
  sessions: WindowSignature;
  analysisVersion: string;
  fittedAt: string;
  result: StoredPeriodResult;
}

export function loadPeriodFits(db: Database, panelId: number, attribute?: string): StoredPeriodFit[] {
  const rows = db
    .prepare(
      `SELECT at.name AS attribute, pf.window_sessions AS windowSessions, fs.label AS firstSession, ls.label AS lastSession,
              pf.sessions_json AS sessionsJson, pf.analysis_version AS analysisVersion, pf.fitted_at AS fittedAt,
              pf.result_json AS resultJson
         FROM period_fit pf
         JOIN attribute at ON at.id = pf.attribute_id
         JOIN session fs ON fs.id = pf.first_session_id
         JOIN session ls ON ls.id = pf.last_session_id
        WHERE pf.panel_id = ? AND (? IS NULL OR at.name = ?)
        ORDER BY at.name, ls.session_date, ls.label`,
    )
    .all(panelId, attribute ?? null, attribute ?? null) as (Omit<StoredPeriodFit, 'sessions' | 'result'> & {
    sessionsJson: string;
    resultJson: string;
  })[];
  return rows.map(({ sessionsJson, resultJson, ...rest }) => ({ ...rest, sessions: JSON.parse(sessionsJson), result: JSON.parse(resultJson) }));
}
