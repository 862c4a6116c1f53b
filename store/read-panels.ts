/**
 * Read queries for the panel pages (home and one panel). Plain objects out, camelCase fields;
 * parameterised SQL only.
 */
import type { Database } from 'better-sqlite3';
import type { PanelSummary, SessionCounts } from '../domain/imports.js';

export interface PanelSummaryRow extends PanelSummary {
  panelId: number;
  createdAt: string;
}

const PANEL_SUMMARY_SQL = `
  SELECT p.id AS panelId, p.name AS name, p.created_at AS createdAt,
    (SELECT COUNT(*) FROM session s WHERE s.panel_id = p.id) AS nSessions,
    (SELECT COUNT(*) FROM assessor a WHERE a.panel_id = p.id) AS nAssessors,
    (SELECT COUNT(*) FROM product pr WHERE pr.panel_id = p.id) AS nProducts,
    (SELECT COUNT(*) FROM attribute at WHERE at.panel_id = p.id) AS nAttributes,
    (SELECT COUNT(*) FROM rating r JOIN session s ON s.id = r.session_id WHERE s.panel_id = p.id) AS nRatings,
    (SELECT COUNT(*) FROM import i WHERE i.panel_id = p.id) AS nImports,
    (SELECT COUNT(*) FROM quarantine q WHERE q.panel_id = p.id AND q.status = 'held') AS nQuarantineHeld,
    (SELECT MIN(session_date) FROM session s WHERE s.panel_id = p.id) AS firstSessionDate,
    (SELECT MAX(session_date) FROM session s WHERE s.panel_id = p.id) AS lastSessionDate
  FROM panel p`;

/** Every panel with its counts, by name. */
export function readPanelSummaries(db: Database): PanelSummaryRow[] {
  return db.prepare(`${PANEL_SUMMARY_SQL} ORDER BY p.name`).all() as PanelSummaryRow[];
}

/** One panel's summary, or null when no panel has that name. */
export function readPanelSummary(db: Database, panelName: string): PanelSummaryRow | null {
  return (db.prepare(`${PANEL_SUMMARY_SQL} WHERE p.name = ?`).get(panelName) as PanelSummaryRow | undefined) ?? null;
}

export interface AttributeScaleRow {
  name: string;
  scaleMin: number;
  scaleMax: number;
  anchorLow: string | null;
  anchorHigh: string | null;
}

/** The panel's attributes with their scales, by name. */
export function readPanelAttributes(db: Database, panelId: number): AttributeScaleRow[] {
  return db
    .prepare(
      `SELECT name, scale_min AS scaleMin, scale_max AS scaleMax, anchor_low AS anchorLow, anchor_high AS anchorHigh
       FROM attribute WHERE panel_id = ? ORDER BY name`,
    )
    .all(panelId) as AttributeScaleRow[];
}

export interface SessionSummaryRow extends SessionCounts {
  sessionId: number;
}

/** Sessions joined to their ratings, grouped per session: append WHERE … GROUP BY s.id. */
export const SESSION_SUMMARY_SELECT = `SELECT s.id AS sessionId, s.label AS label, s.session_date AS date, s.data_version AS dataVersion,
    COUNT(DISTINCT r.assessor_id) AS nAssessors,
    COUNT(DISTINCT r.product_id) AS nProducts,
    COUNT(DISTINCT r.attribute_id) AS nAttributes,
    COALESCE(MAX(r.replicate), 0) AS nReplicates,
    COUNT(r.id) AS nRatings
  FROM session s LEFT JOIN rating r ON r.session_id = s.id`;

/**
 * The panel's sessions, newest first, with the counts the panel page shows. A session whose
 * ratings were all removed still appears, with zero counts.
 */
export function readSessionSummaries(db: Database, panelId: number): SessionSummaryRow[] {
  return db
    .prepare(`${SESSION_SUMMARY_SELECT} WHERE s.panel_id = ? GROUP BY s.id ORDER BY s.session_date DESC, s.label DESC`)
    .all(panelId) as SessionSummaryRow[];
}
