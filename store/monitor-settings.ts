/** Panel thresholds (the flag engine's settings object). Validation happens before saving, in analysis/flags. */
import type { Database } from 'better-sqlite3';

export interface StoredThresholds {
  thresholds: unknown;
  updatedAt: string;
}

/** The panel's saved thresholds, or null when the panel uses the defaults. */
export function loadPanelThresholds(db: Database, panelId: number): StoredThresholds | null {
  const row = db.prepare('SELECT thresholds_json AS json, updated_at AS updatedAt FROM panel_thresholds WHERE panel_id = ?').get(panelId) as
    | { json: string; updatedAt: string }
    | undefined;
  return row ? { thresholds: JSON.parse(row.json), updatedAt: row.updatedAt } : null;
}

export function savePanelThresholds(db: Database, panelId: number, thresholds: unknown, updatedAt = new Date().toISOString()): void {
  db.prepare(
    `INSERT INTO panel_thresholds (panel_id, thresholds_json, updated_at) VALUES (?, ?, ?)
     ON CONFLICT (panel_id) DO UPDATE SET thresholds_json = excluded.thresholds_json, updated_at = excluded.updated_at`,
  ).run(panelId, JSON.stringify(thresholds), updatedAt);
}
