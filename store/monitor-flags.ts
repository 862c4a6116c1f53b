/**
 * The stored flag set of a panel. A rebuild replaces the current set but keeps the review
 * (dismissed/closed with a note) of a flag that fires again, identified by its flag key.
 */
import type { Database } from 'better-sqlite3';
import type { Flag, FlagEvidence, FlagKind, FlagSeverity } from '../domain/flags.js';

export type FlagStatus = 'open' | 'dismissed' | 'closed';

export interface FlagRecord {
  id: number;
  key: string;
  flag: Flag;
  status: FlagStatus;
  reviewNote: string | null;
  reviewedAt: string | null;
  firstSeenAt: string;
  /** Whether the latest flag build produced this flag (0 = kept only as review history). */
  isCurrent: boolean;
  dataSignature: string;
}

/** "Same flag" across rebuilds: kind, who, what, and where the evidence starts. */
export function flagKey(flag: Pick<Flag, 'kind' | 'assessor' | 'product' | 'attribute' | 'firstSession'>): string {
  return [flag.kind, flag.assessor ?? '', flag.product ?? '', flag.attribute ?? '', flag.firstSession].join('|');
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
}

function fromRow(row: FlagRow): FlagRecord {
  return {
    id: row.id,
    key: row.flag_key,
    flag: toFlag(row.kind, row.assessor, row.product, row.attribute, row.first_session, row.severity, JSON.parse(row.evidence_json), row.message),
    status: row.status,
    reviewNote: row.review_note,
    reviewedAt: row.reviewed_at,
    firstSeenAt: row.first_seen_at,
    isCurrent: row.current === 1,
    dataSignature: row.data_signature,
  };
}

export interface FlagBuildInfo {
  dataSignature: string;
  thresholdsHash: string;
  nFlags: number;
  builtAt: string;
}

/**
 * Store a freshly built flag set as the panel's current set. A flag that was dismissed stays
 * dismissed unless it escalated from watch to act (then it is open again, note kept). Open
 * flags that no longer fire are removed unless a retraining record links to them; reviewed
 * ones are kept as history (not current).
 */
export function replaceCurrentFlags(
  db: Database,
  panelId: number,
  flags: Flag[],
  build: Omit<FlagBuildInfo, 'nFlags' | 'builtAt'>,
  builtAt = new Date().toISOString(),
): void {
  const existing = new Map(
    (db.prepare('SELECT * FROM flag WHERE panel_id = ?').all(panelId) as FlagRow[]).map((r) => [r.flag_key, r]),
  );
  const linked = new Set(
    (
      db
        .prepare('SELECT rf.flag_key AS k FROM retraining_flag rf JOIN retraining r ON r.id = rf.retraining_id WHERE r.panel_id = ?')
        .all(panelId) as { k: string }[]
    ).map((r) => r.k),
  );
  const insert = db.prepare(
    `INSERT INTO flag (panel_id, flag_key, kind, assessor, product, attribute, first_session, severity, evidence_json, message,
                       current, status, first_seen_at, data_signature)
     VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, 1, 'open', ?, ?)`,
  );
  const update = db.prepare(
    `UPDATE flag SET severity = ?, evidence_json = ?, message = ?, current = 1, status = ?, data_signature = ? WHERE id = ?`,
  );
  const retire = db.prepare('UPDATE flag SET current = 0 WHERE id = ?');
  const remove = db.prepare('DELETE FROM flag WHERE id = ?');
  db.transaction(() => {
    const seen = new Set<string>();
    for (const flag of flags) {
      const key = flagKey(flag);
      if (seen.has(key)) continue; // the engine should not emit duplicates; keep the first
      seen.add(key);
      const old = existing.get(key);
      const evidenceJson = JSON.stringify(flag.evidence);
      if (!old) {
        insert.run(panelId, key, flag.kind, flag.assessor, flag.product, flag.attribute, flag.firstSession, flag.severity, evidenceJson, flag.message, builtAt, build.dataSignature);
        continue;
      }
      const escalated = old.severity === 'watch' && flag.severity === 'act';
      const status: FlagStatus = old.status === 'dismissed' && escalated ? 'open' : old.status;
      update.run(flag.severity, evidenceJson, flag.message, status, build.dataSignature, old.id);
    }
    for (const [key, old] of existing) {
      if (seen.has(key)) continue;
      if (old.status === 'open' && !linked.has(key)) remove.run(old.id);
      else retire.run(old.id);
    }
    db.prepare(
      `INSERT INTO flag_build (panel_id, data_signature, thresholds_hash, n_flags, built_at) VALUES (?, ?, ?, ?, ?)
       ON CONFLICT (panel_id) DO UPDATE SET data_signature = excluded.data_signature,
         thresholds_hash = excluded.thresholds_hash, n_flags = excluded.n_flags, built_at = excluded.built_at`,
    ).run(panelId, build.dataSignature, build.thresholdsHash, seen.size, builtAt);
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
  /** Keep flags whose evidence starts at or after this session (session order). */
  sinceSession?: string;
  kind?: FlagKind;
  severity?: FlagSeverity;
  status?: FlagStatus;
  assessor?: string;
  /** Include reviewed flags that no longer fire (default false). */
  includeHistory?: boolean;
}

/**
 * Flags of a panel in a stable order: session order of firstSession, then kind, assessor,
 * attribute, product. Throws RangeError when sinceSession is not a session of the panel.
 */
export function listFlags(db: Database, panelId: number, query: FlagQuery = {}): FlagRecord[] {
  const order = new Map(
    (
      db.prepare('SELECT label FROM session WHERE panel_id = ? ORDER BY session_date, label').all(panelId) as { label: string }[]
    ).map((r, i) => [r.label, i]),
  );
  let sinceIndex = -1;
  if (query.sinceSession !== undefined) {
    const found = order.get(query.sinceSession);
    if (found === undefined) throw new RangeError(`No session "${query.sinceSession}" in this panel.`);
    sinceIndex = found;
  }
  const rows = db.prepare('SELECT * FROM flag WHERE panel_id = ?').all(panelId) as FlagRow[];
  const position = (label: string) => order.get(label) ?? Number.MAX_SAFE_INTEGER;
  return rows
    .filter(
      (r) =>
        (query.includeHistory || r.current === 1) &&
        (query.kind === undefined || r.kind === query.kind) &&
        (query.severity === undefined || r.severity === query.severity) &&
        (query.status === undefined || r.status === query.status) &&
        (query.assessor === undefined || r.assessor === query.assessor) &&
        position(r.first_session) >= sinceIndex,
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

/** Record a review: dismiss (with a note), close (retraining worked) or reopen. Returns false if no such flag. */
export function reviewFlag(db: Database, panelId: number, flagId: number, status: FlagStatus, note: string, reviewedAt = new Date().toISOString()): boolean {
  const result = db
    .prepare('UPDATE flag SET status = ?, review_note = ?, reviewed_at = ? WHERE panel_id = ? AND id = ?')
    .run(status, note, reviewedAt, panelId, flagId);
  return result.changes === 1;
}

/**
 * The flags the CLI (`flags --format json`) and the API (`GET /api/panels/:panel/flags`) give:
 * the current set as Flag objects, optionally from a session on. null when the panel is unknown.
 */
export function listCurrentFlagObjects(db: Database, panelName: string, sinceSession?: string): Flag[] | null {
  const panel = db.prepare('SELECT id FROM panel WHERE name = ?').get(panelName) as { id: number } | undefined;
  if (!panel) return null;
  return listFlags(db, panel.id, { sinceSession }).map((record) => record.flag);
}

/** Close the open flags with these keys (a retraining judged successful), with the evidence as the note. */
export function closeFlagsByKey(db: Database, panelId: number, keys: readonly string[], note: string, reviewedAt = new Date().toISOString()): number {
  const close = db.prepare("UPDATE flag SET status = 'closed', review_note = ?, reviewed_at = ? WHERE panel_id = ? AND flag_key = ? AND status = 'open'");
  return db.transaction(() => keys.reduce((n, key) => n + close.run(note, reviewedAt, panelId, key).changes, 0))();
}
