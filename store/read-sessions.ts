/** Read queries for one session's page and its CSV download. */
import type { Database } from 'better-sqlite3';
import { SESSION_SUMMARY_SELECT, type SessionSummaryRow } from './read-panels.js';

/** One session's counts, or null when the panel has no session with that label. */
export function readSessionSummary(db: Database, panelId: number, label: string): SessionSummaryRow | null {
  const row = db.prepare(`${SESSION_SUMMARY_SELECT} WHERE s.panel_id = ? AND s.label = ? GROUP BY s.id`).get(panelId, label) as
    | SessionSummaryRow
    | undefined;
  return row ?? null;
}

export interface SessionRatingRow {
  attribute: string;
  assessor: string;
  product: string;
  replicate: number;
  value: number;
  code: string | null;
}

/**
 * How a session's ratings are ordered within an attribute: by product for the page and the CSV
 * (a reader compares assessors on one product), by assessor for the fits (each assessor's ratings
 * together: the order the stored fits were computed from, so their last digits do not move).
 */
export type SessionRatingOrder = 'product-first' | 'assessor-first';

const ORDER_BY: Record<SessionRatingOrder, string> = {
  'product-first': 'at.name, p.code, a.code, r.replicate',
  'assessor-first': 'at.name, a.code, p.code, r.replicate',
};

/** Every stored rating of one session, attribute first, then as `order` says, replicate last. */
export function readSessionRatingRows(db: Database, sessionId: number, order: SessionRatingOrder = 'product-first'): SessionRatingRow[] {
  return db
    .prepare(
      `SELECT at.name AS attribute, a.code AS assessor, p.code AS product, r.replicate AS replicate,
         r.value AS value, r.sample_code AS code
       FROM rating r
       JOIN attribute at ON at.id = r.attribute_id
       JOIN assessor a ON a.id = r.assessor_id
       JOIN product p ON p.id = r.product_id
       WHERE r.session_id = ?
       ORDER BY ${ORDER_BY[order]}`,
    )
    .all(sessionId) as SessionRatingRow[];
}

export interface ProductRoleRow {
  code: string;
  displayName: string | null;
  role: 'test' | 'reference';
}

/** The products rated in one session, with their role. */
export function readSessionProducts(db: Database, sessionId: number): ProductRoleRow[] {
  return db
    .prepare(
      `SELECT DISTINCT p.code AS code, p.display_name AS displayName, p.role AS role
       FROM rating r JOIN product p ON p.id = r.product_id
       WHERE r.session_id = ? ORDER BY p.code`,
    )
    .all(sessionId) as ProductRoleRow[];
}
