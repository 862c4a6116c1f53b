/**
 * The stored flags of a panel as cases. A case is identified by kind + assessor + product +
 * attribute (its scope), so a rebuild updates the evidence of the same case in place, whatever
 * session the evidence window now starts at. Status open | dismissed | closed, with every change
 * kept in flag_review (who, when, note, why). The rules (docs/methods.md §6.7, "Flag cases and re-opening"):
 * - a new scope opens a case, detected at the newest session its evidence covers;
 * - a dismissed case stays dismissed while its evidence stays within what was dismissed and
 *   re-opens, saying why, when it gets materially worse (store/flag-case-rules.ts);
 * - an open case whose evidence no longer fires is closed automatically (unless a retraining record
 *   links it: the retraining evaluation decides); it re-opens as the same case (same id) if it fires again;
 * - a closed case that still fires (closed after a retraining) re-opens only when materially worse.
 */
import type { Database } from 'better-sqlite3';
import type { Flag, FlagCase, FlagEvidence, FlagKind, FlagSeverity, FlagStatus } from '../domain/flags.js';
import { effectSize, isSessionScoped, worseningReason } from './flag-case-rules.js';

export type { FlagStatus } from '../domain/flags.js';

export interface FlagHistoryEntry {
  status: FlagStatus;
  note: string;
  reviewedBy: string;
  reviewedAt: string;
  session: string | null;
  /** 'review' (a person), 'reopened', 'no-longer-fires', 'fires-again', 'retraining'. */
  source: string;
}

export interface FlagRecord {
  id: number;
  key: string;
  /** The case as the CLI and API give it: every Flag field plus id, status, detectedSession, updatedSession. */
  flag: FlagCase;
  status: FlagStatus;
  reviewNote: string | null;
  reviewedAt: string | null;
  firstSeenAt: string;
  /** Whether the latest flag build produced this case (its evidence fires now). */
  isCurrent: boolean;
  dataSignature: string;
  detectedSession: string;
  updatedSession: string;
  /** The newest session of the panel when the status last changed (null: never changed). */
  statusSession: string | null;
  /** The newest session of the panel when the evidence last got materially worse. */
  worsenedSession: string | null;
  /** Severity and evidence when dismissed (what a re-opening compares to). */
  dismissed: { severity: FlagSeverity; evidence: FlagEvidence } | null;
}

/** "Same case" across rebuilds: kind, who, which product, which attribute (and the session, for findings about one session's data). */
export function flagKey(flag: Pick<Flag, 'kind' | 'assessor' | 'product' | 'attribute' | 'firstSession'>): string {
  const scope = [flag.kind, flag.assessor ?? '', flag.product ?? '', flag.attribute ?? ''];
  if (isSessionScoped(flag.kind)) scope.push(flag.firstSession);
  return scope.join('|');
}

/** A Flag with exactly the fields of the contract (domain/flags.ts), in its order. */
export function toFlag(kind: string, assessor: string | null, product: string | null, attribute: string | null, firstSession: string, severity: string, evidence: FlagEvidence, message: string): Flag {
  return { kind: kind as FlagKind, assessor, product, attribute, firstSession, severity: severity as FlagSeverity, evidence, message };
}

interface FlagRow {
  id: number;
  flag_key: string;
  kind: string;
  assessor: string | null;
  product: string | null;
  attribute: string | null;
  first_session: string;
  severity: string;
  evidence_json: string;
  message: string;
  current: number;
  status: FlagStatus;
  review_note: string | null;
  reviewed_at: string | null;
  first_seen_at: string;
  data_signature: string;
  detected_session: string;
  updated_session: string;
  status_session: string | null;
  worsened_session: string | null;
  dismissed_severity: string | null;
  dismissed_evidence_json: string | null;
}

function fromRow(row: FlagRow): FlagRecord {
  const flag = toFlag(row.kind, row.assessor, row.product, row.attribute, row.first_session, row.severity, JSON.parse(row.evidence_json), row.message);
  return {
    id: row.id,
    key: row.flag_key,
    flag: { ...flag, id: row.id, status: row.status, detectedSession: row.detected_session, updatedSession: row.updated_session },
    status: row.status,
    reviewNote: row.review_note,
    reviewedAt: row.reviewed_at,
    firstSeenAt: row.first_seen_at,
    isCurrent: row.current === 1,
    dataSignature: row.data_signature,
    detectedSession: row.detected_session,
    updatedSession: row.updated_session,
    statusSession: row.status_session,
    worsenedSession: row.worsened_session,
    dismissed:
      row.dismissed_severity !== null && row.dismissed_evidence_json !== null
        ? { severity: row.dismissed_severity as FlagSeverity, evidence: JSON.parse(row.dismissed_evidence_json) }
        : null,
  };
}

export interface FlagBuildInfo {
  dataSignature: string;
  thresholdsHash: string;
  nFlags: number;
  builtAt: string;
}

/** Session labels of a panel in session order. */
function sessionOrder(db: Database, panelId: number): string[] {
  return (db.prepare('SELECT label FROM session WHERE panel_id = ? ORDER BY session_date, label').all(panelId) as { label: string }[]).map((r) => r.label);
}

function lastSessionOf(flag: Flag, fallback: string): string {
  return typeof flag.evidence.lastSession === 'string' ? flag.evidence.lastSession : fallback;
}

/** Of two flags on one scope (the engine may report two windows), the one to keep: higher severity, then larger effect. */
function stronger(a: Flag, b: Flag): Flag {
  if (a.severity !== b.severity) return a.severity === 'act' ? a : b;
  return effectSize(b.evidence).value > effectSize(a.evidence).value ? b : a;
}

/**
 * Store a freshly built flag set: update the cases in place, open new ones, re-open, close
 * (see the rules at the top of this file). One transaction.
 */
export function replaceCurrentFlags(
  db: Database,
  panelId: number,
  flags: Flag[],
  build: Omit<FlagBuildInfo, 'nFlags' | 'builtAt'>,
  builtAt = new Date().toISOString(),
): void {
  const latest = sessionOrder(db, panelId).at(-1) ?? '';
  const existing = new Map((db.prepare('SELECT * FROM flag WHERE panel_id = ?').all(panelId) as FlagRow[]).map((r) => [r.flag_key, r]));
  // Open cases linked to a retraining record are judged by the retraining evaluation, not closed here.
  const linked = new Set(
    (
      db
        .prepare('SELECT rf.flag_key AS k FROM retraining_flag rf JOIN retraining r ON r.id = rf.retraining_id WHERE r.panel_id = ?')
        .all(panelId) as { k: string }[]
    ).map((r) => r.k),
  );
  const byKey = new Map<string, Flag>();
  for (const flag of flags) {
    const key = flagKey(flag);
    const other = byKey.get(key);
    byKey.set(key, other ? stronger(other, flag) : flag);
  }
  const insert = db.prepare(
    `INSERT INTO flag (panel_id, flag_key, kind, assessor, product, attribute, first_session, severity, evidence_json, message,
                       current, status, first_seen_at, data_signature, detected_session, updated_session)
     VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, 1, 'open', ?, ?, ?, ?)`,
  );
  const update = db.prepare(
    `UPDATE flag SET first_session = ?, severity = ?, evidence_json = ?, message = ?, current = 1, data_signature = ?,
                     updated_session = ?, worsened_session = ? WHERE id = ?`,
  );
  const setStatus = db.prepare('UPDATE flag SET status = ?, status_session = ?, review_note = ?, reviewed_at = ? WHERE id = ?');
  const retire = db.prepare('UPDATE flag SET current = 0 WHERE id = ?');
  const history = db.prepare(
    "INSERT INTO flag_review (flag_id, status, note, reviewed_by, reviewed_at, session_label, source) VALUES (?, ?, ?, '', ?, ?, ?)",
  );
  const change = (row: FlagRow, status: FlagStatus, note: string, source: string) => {
    setStatus.run(status, latest, note, builtAt, row.id);
    history.run(row.id, status, note, builtAt, latest, source);
  };
  db.transaction(() => {
    for (const [key, flag] of byKey) {
      const old = existing.get(key);
      const evidenceJson = JSON.stringify(flag.evidence);
      const updatedSession = lastSessionOf(flag, latest);
      if (!old) {
        insert.run(panelId, key, flag.kind, flag.assessor, flag.product, flag.attribute, flag.firstSession, flag.severity, evidenceJson, flag.message, builtAt, build.dataSignature, updatedSession, updatedSession);
        continue;
      }
      const previous = { severity: old.severity as FlagSeverity, evidence: JSON.parse(old.evidence_json) as FlagEvidence };
      // Worse than at the previous build (only when the evidence covers newer data).
      const worse = old.current === 1 && updatedSession !== old.updated_session ? worseningReason(previous, flag) : null;
      update.run(flag.firstSession, flag.severity, evidenceJson, flag.message, build.dataSignature, updatedSession, worse ? latest : old.worsened_session, old.id);
      if (old.status === 'dismissed') {
        const reference = old.dismissed_severity && old.dismissed_evidence_json
          ? { severity: old.dismissed_severity as FlagSeverity, evidence: JSON.parse(old.dismissed_evidence_json) as FlagEvidence }
          : previous;
        const reason = worseningReason(reference, flag);
        if (reason) change(old, 'open', `Re-opened: since it was dismissed, ${reason}.`, 'reopened');
      } else if (old.status === 'closed') {
        if (old.current === 0) change(old, 'open', 'Re-opened: the evidence fires again.', 'fires-again');
        else if (worse) change(old, 'open', `Re-opened: ${worse}.`, 'reopened');
      }
    }
    for (const [key, old] of existing) {
      if (byKey.has(key) || old.current === 0) continue;
      retire.run(old.id);
      if (old.status === 'open' && !linked.has(key)) change(old, 'closed', 'Closed automatically: the evidence no longer crosses its threshold.', 'no-longer-fires');
    }
    db.prepare(
      `INSERT INTO flag_build (panel_id, data_signature, thresholds_hash, n_flags, built_at) VALUES (?, ?, ?, ?, ?)
       ON CONFLICT (panel_id) DO UPDATE SET data_signature = excluded.data_signature,
         thresholds_hash = excluded.thresholds_hash, n_flags = excluded.n_flags, built_at = excluded.built_at`,
    ).run(panelId, build.dataSignature, build.thresholdsHash, byKey.size, builtAt);
  })();
}

export function loadFlagBuild(db: Database, panelId: number): FlagBuildInfo | null {
  const row = db
    .prepare(
      'SELECT data_signature AS dataSignature, thresholds_hash AS thresholdsHash, n_flags AS nFlags, built_at AS builtAt FROM flag_build WHERE panel_id = ?',
    )
    .get(panelId) as FlagBuildInfo | undefined;
  return row ?? null;
}

export interface FlagQuery {
  /** Keep cases detected, or whose status changed, at or after this session (session order). */
  sinceSession?: string;
  kind?: FlagKind;
  severity?: FlagSeverity;
  status?: FlagStatus;
  assessor?: string;
  /** Include cases whose evidence no longer fires (default false). */
  includeHistory?: boolean;
}

/**
 * Cases of a panel in a stable order: session order of firstSession, then kind, assessor,
 * attribute, product. Throws RangeError when sinceSession is not a session of the panel.
 */
export function listFlags(db: Database, panelId: number, query: FlagQuery = {}): FlagRecord[] {
  const order = new Map(sessionOrder(db, panelId).map((label, i) => [label, i]));
  let sinceIndex = -1;
  if (query.sinceSession !== undefined) {
    const found = order.get(query.sinceSession);
    if (found === undefined) throw new RangeError(`No session "${query.sinceSession}" in this panel.`);
    sinceIndex = found;
  }
  const rows = db.prepare('SELECT * FROM flag WHERE panel_id = ?').all(panelId) as FlagRow[];
  const position = (label: string | null) => (label === null ? -1 : (order.get(label) ?? Number.MAX_SAFE_INTEGER));
  return rows
    .filter(
      (r) =>
        (query.includeHistory || r.current === 1) &&
        (query.kind === undefined || r.kind === query.kind) &&
        (query.severity === undefined || r.severity === query.severity) &&
        (query.status === undefined || r.status === query.status) &&
        (query.assessor === undefined || r.assessor === query.assessor) &&
        (sinceIndex < 0 || position(r.detected_session) >= sinceIndex || position(r.status_session) >= sinceIndex),
    )
    .sort(
      (a, b) =>
        position(a.first_session) - position(b.first_session) ||
        cmp(a.kind, b.kind) ||
        cmp(a.assessor, b.assessor) ||
        cmp(a.attribute, b.attribute) ||
        cmp(a.product, b.product),
    )
    .map(fromRow);
}

function cmp(a: string | null, b: string | null): number {
  return (a ?? '').localeCompare(b ?? '');
}

export function getFlag(db: Database, panelId: number, flagId: number): FlagRecord | null {
  const row = db.prepare('SELECT * FROM flag WHERE panel_id = ? AND id = ?').get(panelId, flagId) as FlagRow | undefined;
  return row ? fromRow(row) : null;
}

/** Every status change of a case, oldest first. */
export function flagHistory(db: Database, flagId: number): FlagHistoryEntry[] {
  return db
    .prepare(
      `SELECT status, note, reviewed_by AS reviewedBy, reviewed_at AS reviewedAt, session_label AS session, source
         FROM flag_review WHERE flag_id = ? ORDER BY id`,
    )
    .all(flagId) as FlagHistoryEntry[];
}

/** Status histories of all cases of a panel, by case id (one query for a page). */
export function flagHistories(db: Database, panelId: number): Map<number, FlagHistoryEntry[]> {
  const rows = db
    .prepare(
      `SELECT r.flag_id AS flagId, r.status, r.note, r.reviewed_by AS reviewedBy, r.reviewed_at AS reviewedAt, r.session_label AS session, r.source
         FROM flag_review r JOIN flag f ON f.id = r.flag_id WHERE f.panel_id = ? ORDER BY r.id`,
    )
    .all(panelId) as (FlagHistoryEntry & { flagId: number })[];
  const out = new Map<number, FlagHistoryEntry[]>();
  for (const { flagId, ...entry } of rows) {
    const list = out.get(flagId) ?? [];
    list.push(entry);
    out.set(flagId, list);
  }
  return out;
}

/**
 * Record a review: dismiss (with a note; the evidence at this moment is what a later re-opening
 * compares to), close or reopen. Returns false if no such case.
 */
export function reviewFlag(
  db: Database,
  panelId: number,
  flagId: number,
  status: FlagStatus,
  note: string,
  reviewedAt = new Date().toISOString(),
  reviewedBy = '',
): boolean {
  const latest = sessionOrder(db, panelId).at(-1) ?? null;
  return db.transaction(() => {
    const result = db
      .prepare(
        `UPDATE flag SET status = ?, review_note = ?, reviewed_at = ?, status_session = ?,
                dismissed_severity = CASE WHEN ? = 'dismissed' THEN severity ELSE dismissed_severity END,
                dismissed_evidence_json = CASE WHEN ? = 'dismissed' THEN evidence_json ELSE dismissed_evidence_json END
          WHERE panel_id = ? AND id = ?`,
      )
      .run(status, note, reviewedAt, latest, status, status, panelId, flagId);
    if (result.changes !== 1) return false;
    db.prepare("INSERT INTO flag_review (flag_id, status, note, reviewed_by, reviewed_at, session_label, source) VALUES (?, ?, ?, ?, ?, ?, 'review')").run(
      flagId,
      status,
      note,
      reviewedBy,
      reviewedAt,
      latest,
    );
    return true;
  })();
}

/**
 * The cases the CLI (`flags --format json`) and the API (`GET /api/panels/:panel/flags`) give:
 * those whose evidence fires now, optionally only those detected (or whose status changed) at or
 * after a session. null when the panel is unknown.
 */
export function listCurrentFlagObjects(db: Database, panelName: string, sinceSession?: string): FlagCase[] | null {
  const panel = db.prepare('SELECT id FROM panel WHERE name = ?').get(panelName) as { id: number } | undefined;
  if (!panel) return null;
  return listFlags(db, panel.id, { sinceSession }).map((record) => record.flag);
}

/** Close the open cases with these keys (a retraining judged successful), with the evidence as the note. */
export function closeFlagsByKey(db: Database, panelId: number, keys: readonly string[], note: string, reviewedAt = new Date().toISOString()): number {
  const latest = sessionOrder(db, panelId).at(-1) ?? null;
  const find = db.prepare("SELECT id FROM flag WHERE panel_id = ? AND flag_key = ? AND status = 'open'");
  const close = db.prepare("UPDATE flag SET status = 'closed', review_note = ?, reviewed_at = ?, status_session = ? WHERE id = ?");
  const history = db.prepare("INSERT INTO flag_review (flag_id, status, note, reviewed_by, reviewed_at, session_label, source) VALUES (?, 'closed', ?, '', ?, ?, 'retraining')");
  return db.transaction(() => {
    let n = 0;
    for (const key of keys) {
      const row = find.get(panelId, key) as { id: number } | undefined;
      if (!row) continue;
      close.run(note, reviewedAt, latest, row.id);
      history.run(row.id, note, reviewedAt, latest);
      n += 1;
    }
    return n;
  })();
}
