/**
 * Panel events (retraining, new control batch, notes, a reference period for chart baselines) and
 * retraining records with their linked flags.
 */
import type { Database } from 'better-sqlite3';
import type { RetrainingEvaluation } from '../analysis/flags/retraining.js';

export type PanelEventKind = 'retraining' | 'control-batch' | 'note' | 'reference-period';
export const PANEL_EVENT_KINDS: readonly PanelEventKind[] = ['retraining', 'control-batch', 'note', 'reference-period'];

export interface PanelEvent {
  id: number;
  kind: PanelEventKind;
  /** First session the event applies to (baselines restart here for retraining and control-batch). */
  session: string;
  /** Last session (inclusive) of a reference period; null for every other kind. */
  untilSession: string | null;
  /** null: the whole panel. */
  assessor: string | null;
  note: string;
  createdAt: string;
}

export function addPanelEvent(
  db: Database,
  panelId: number,
  event: Omit<PanelEvent, 'id' | 'createdAt' | 'untilSession'> & { untilSession?: string | null },
  createdAt = new Date().toISOString(),
): number {
  const result = db
    .prepare('INSERT INTO panel_event (panel_id, kind, session_label, until_session_label, assessor, note, created_at) VALUES (?, ?, ?, ?, ?, ?, ?)')
    .run(panelId, event.kind, event.session, event.untilSession ?? null, event.assessor, event.note, createdAt);
  return Number(result.lastInsertRowid);
}

export function listPanelEvents(db: Database, panelId: number): PanelEvent[] {
  return db
    .prepare(
      `SELECT e.id, e.kind, e.session_label AS session, e.until_session_label AS untilSession, e.assessor, e.note, e.created_at AS createdAt
         FROM panel_event e LEFT JOIN session s ON s.panel_id = e.panel_id AND s.label = e.session_label
        WHERE e.panel_id = ? ORDER BY s.session_date, e.session_label, e.id`,
    )
    .all(panelId) as PanelEvent[];
}

export function deletePanelEvent(db: Database, panelId: number, eventId: number): boolean {
  return db.prepare('DELETE FROM panel_event WHERE panel_id = ? AND id = ?').run(panelId, eventId).changes === 1;
}

export type RetrainingStatus = 'planned' | 'done';

export interface RetrainingRecord {
  id: number;
  assessor: string;
  status: RetrainingStatus;
  /** YYYY-MM-DD, planned or actual. */
  date: string;
  note: string;
  flagKeys: string[];
  /** The before/after evaluation, once made. */
  outcome: RetrainingEvaluation | null;
  createdAt: string;
  updatedAt: string;
}

export function addRetraining(
  db: Database,
  panelId: number,
  record: { assessor: string; status: RetrainingStatus; date: string; note: string; flagKeys: string[] },
  now = new Date().toISOString(),
): number {
  return db.transaction(() => {
    const id = Number(
      db
        .prepare(
          'INSERT INTO retraining (panel_id, assessor, status, retraining_date, note, created_at, updated_at) VALUES (?, ?, ?, ?, ?, ?, ?)',
        )
        .run(panelId, record.assessor, record.status, record.date, record.note, now, now).lastInsertRowid,
    );
    const link = db.prepare('INSERT OR IGNORE INTO retraining_flag (retraining_id, flag_key) VALUES (?, ?)');
    for (const key of record.flagKeys) link.run(id, key);
    return id;
  })();
}

export function updateRetraining(
  db: Database,
  panelId: number,
  id: number,
  change: { status?: RetrainingStatus; date?: string; note?: string; outcome?: unknown },
  now = new Date().toISOString(),
): boolean {
  const current = db.prepare('SELECT * FROM retraining WHERE panel_id = ? AND id = ?').get(panelId, id) as
    | { status: string; retraining_date: string; note: string; outcome_json: string | null }
    | undefined;
  if (!current) return false;
  db.prepare('UPDATE retraining SET status = ?, retraining_date = ?, note = ?, outcome_json = ?, updated_at = ? WHERE id = ?').run(
    change.status ?? current.status,
    change.date ?? current.retraining_date,
    change.note ?? current.note,
    change.outcome === undefined ? current.outcome_json : JSON.stringify(change.outcome),
    now,
    id,
  );
  return true;
}

export function listRetraining(db: Database, panelId: number): RetrainingRecord[] {
  const rows = db
    .prepare(
      `SELECT id, assessor, status, retraining_date AS date, note, outcome_json AS outcomeJson, created_at AS createdAt,
              updated_at AS updatedAt
         FROM retraining WHERE panel_id = ? ORDER BY assessor, retraining_date, id`,
    )
    .all(panelId) as (Omit<RetrainingRecord, 'flagKeys' | 'outcome'> & { outcomeJson: string | null })[];
  const keys = db.prepare('SELECT flag_key AS k FROM retraining_flag WHERE retraining_id = ? ORDER BY flag_key');
  return rows.map(({ outcomeJson, ...r }) => ({
    ...r,
    flagKeys: (keys.all(r.id) as { k: string }[]).map((k) => k.k),
    outcome: outcomeJson === null ? null : JSON.parse(outcomeJson),
  }));
}

/**
 * One retraining record: every retraining recorded as done has its baseline-restarting panel
 * event (kind 'retraining', naming the record) at the first session on or after its date; a
 * record set back to planned loses it. Events wait until such a session exists. Returns the
 * number of events added, moved or removed.
 */
export function syncRetrainingEvents(db: Database, panelId: number, now = new Date().toISOString()): number {
  const records = db.prepare('SELECT id, assessor, status, retraining_date AS date, note FROM retraining WHERE panel_id = ?').all(panelId) as {
    id: number;
    assessor: string;
    status: RetrainingStatus;
    date: string;
    note: string;
  }[];
  const firstSessionFrom = db.prepare('SELECT label FROM session WHERE panel_id = ? AND session_date >= ? ORDER BY session_date, label LIMIT 1');
  const eventOf = db.prepare("SELECT id, session_label AS session FROM panel_event WHERE panel_id = ? AND retraining_id = ? AND kind = 'retraining'");
  const insert = db.prepare(
    "INSERT INTO panel_event (panel_id, kind, session_label, assessor, note, created_at, retraining_id) VALUES (?, 'retraining', ?, ?, ?, ?, ?)",
  );
  const move = db.prepare('UPDATE panel_event SET session_label = ? WHERE id = ?');
  const remove = db.prepare('DELETE FROM panel_event WHERE id = ?');
  return db.transaction(() => {
    let changes = 0;
    for (const r of records) {
      const event = eventOf.get(panelId, r.id) as { id: number; session: string } | undefined;
      const session = r.status === 'done' ? ((firstSessionFrom.get(panelId, r.date) as { label: string } | undefined)?.label ?? null) : null;
      if (session === null) {
        if (event && r.status !== 'done') changes += remove.run(event.id).changes;
        continue;
      }
      if (!event) changes += insert.run(panelId, session, r.assessor, `Retraining done on ${r.date}${r.note ? `: ${r.note}` : ''} (retraining record ${r.id})`, now, r.id).changes;
      else if (event.session !== session) changes += move.run(session, event.id).changes;
    }
    return changes;
  })();
}
