/**
 * Read side of the reports (session report, range report, assessor feedback sheet): the stored
 * fits, indices and fit notes of chosen sessions, the open flags, and one assessor's ratings of the
 * reference product. Nothing here fits a model: the reports show what the last refit stored.
 */
import type { Database } from 'better-sqlite3';
import type { FitJson } from '../domain/analysis.js';
import type { AssessorSessionIndices } from '../analysis/indices/types.js';

export interface ReportSessionRow {
  id: number;
  label: string;
  date: string;
  dataVersion: number;
}

/** Sessions of a panel in analysis order (date, then label). */
export function listReportSessions(db: Database, panelId: number): ReportSessionRow[] {
  return db
    .prepare('SELECT id, label, session_date AS date, data_version AS dataVersion FROM session WHERE panel_id = ? ORDER BY session_date, label')
    .all(panelId) as ReportSessionRow[];
}

export interface StoredSessionAnalysis {
  session: string;
  /** Attribute name → stored fit (absent when the attribute could not be fitted). */
  fits: Map<string, FitJson>;
  /** Attribute name → per-assessor indices. */
  indices: Map<string, AssessorSessionIndices[]>;
  /** Notes of the refit (fits that could not be made), as stored. */
  fitNotes: { attribute?: string; message?: string; code?: string }[];
  /** Data version the stored results were computed from (null: never fitted). */
  fittedDataVersion: number | null;
  fittedAt: string | null;
}

/**
 * Parsed JSON of stored fits and indices, keyed by store connection, row and write time: a year's indices are ~4 MB
 * of JSON, and parsing them dominated the range report's time. A refit rewrites the row with a
 * new time, so a stale entry is never used; the cache is dropped whole when it grows past its cap.
 */
const parsedCaches = new WeakMap<Database, Map<string, unknown>>();
const PARSED_CACHE_CAP = 8192;

function parsedOnce<T>(db: Database, key: string, json: string): T {
  let parsedCache = parsedCaches.get(db);
  if (!parsedCache) parsedCaches.set(db, (parsedCache = new Map()));
  let value = parsedCache.get(key);
  if (value === undefined) {
    if (parsedCache.size >= PARSED_CACHE_CAP) parsedCache.clear();
    value = JSON.parse(json);
    parsedCache.set(key, value);
  }
  return value as T;
}

/** Stored fits, indices and refit notes of the given sessions (one query per table). Treat the results as read-only (shared). */
export function loadSessionAnalyses(db: Database, sessions: readonly ReportSessionRow[]): Map<string, StoredSessionAnalysis> {
  const out = new Map<string, StoredSessionAnalysis>();
  if (sessions.length === 0) return out;
  const byId = new Map<number, StoredSessionAnalysis>();
  for (const s of sessions) {
    const entry: StoredSessionAnalysis = { session: s.label, fits: new Map(), indices: new Map(), fitNotes: [], fittedDataVersion: null, fittedAt: null };
    out.set(s.label, entry);
    byId.set(s.id, entry);
  }
  const ids = sessions.map((s) => s.id);
  const placeholders = ids.map(() => '?').join(',');
  const fits = db
    .prepare(
      `SELECT f.session_id AS sessionId, at.name AS attribute, f.fit_json AS json, f.fitted_at AS at FROM session_fit f
         JOIN attribute at ON at.id = f.attribute_id WHERE f.session_id IN (${placeholders})`,
    )
    .all(...ids) as { sessionId: number; attribute: string; json: string; at: string }[];
  for (const row of fits) byId.get(row.sessionId)!.fits.set(row.attribute, parsedOnce<FitJson>(db, `fit|${row.sessionId}|${row.attribute}|${row.at}`, row.json));
  const indices = db
    .prepare(
      `SELECT i.session_id AS sessionId, at.name AS attribute, i.indices_json AS json, i.computed_at AS at FROM session_indices i
         JOIN attribute at ON at.id = i.attribute_id WHERE i.session_id IN (${placeholders})`,
    )
    .all(...ids) as { sessionId: number; attribute: string; json: string; at: string }[];
  for (const row of indices) {
    byId.get(row.sessionId)!.indices.set(row.attribute, parsedOnce<AssessorSessionIndices[]>(db, `indices|${row.sessionId}|${row.attribute}|${row.at}`, row.json));
  }
  const quality = db
    .prepare(
      `SELECT session_id AS sessionId, data_version AS dataVersion, findings_json AS json, computed_at AS computedAt
         FROM session_quality WHERE session_id IN (${placeholders})`,
    )
    .all(...ids) as { sessionId: number; dataVersion: number; json: string; computedAt: string }[];
  for (const row of quality) {
    const entry = byId.get(row.sessionId)!;
    entry.fitNotes = JSON.parse(row.json) as StoredSessionAnalysis['fitNotes'];
    entry.fittedDataVersion = row.dataVersion;
    entry.fittedAt = row.computedAt;
  }
  return out;
}

/** Codes and roles of the panel's products. */
export function listProductRoles(db: Database, panelId: number): { code: string; role: 'test' | 'reference' }[] {
  return db.prepare('SELECT code, role FROM product WHERE panel_id = ? ORDER BY code').all(panelId) as { code: string; role: 'test' | 'reference' }[];
}

export interface AssessorRatingRow {
  session: string;
  attribute: string;
  product: string;
  value: number;
}

/** One assessor's ratings of some products in some sessions (for their own sheet only). */
export function loadAssessorRatings(db: Database, panelId: number, assessor: string, sessionIds: readonly number[], products: readonly string[]): AssessorRatingRow[] {
  if (sessionIds.length === 0 || products.length === 0) return [];
  return db
    .prepare(
      `SELECT s.label AS session, at.name AS attribute, p.code AS product, r.value AS value
         FROM rating r
         JOIN session s ON s.id = r.session_id
         JOIN attribute at ON at.id = r.attribute_id
         JOIN product p ON p.id = r.product_id
         JOIN assessor a ON a.id = r.assessor_id
        WHERE s.panel_id = ? AND a.code = ? AND r.session_id IN (${sessionIds.map(() => '?').join(',')})
          AND p.code IN (${products.map(() => '?').join(',')})`,
    )
    .all(panelId, assessor, ...sessionIds, ...products) as AssessorRatingRow[];
}

/** Whether the panel has an assessor with this code. */
export function hasAssessor(db: Database, panelId: number, assessor: string): boolean {
  return db.prepare('SELECT 1 FROM assessor WHERE panel_id = ? AND code = ?').get(panelId, assessor) !== undefined;
}
