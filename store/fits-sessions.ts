/**
 * Read side for the refit: panels, sessions in time order with their data versions, and the
 * observations of one session grouped by attribute (with each attribute's scale).
 */
import type { Database } from 'better-sqlite3';
import type { PackedRatings } from '../domain/packed-ratings.js';
import type { InputFinding } from '../domain/problems.js';
import type { Observation, Rating, ScaleRange } from '../domain/ratings.js';
import { readSessionRatingRows } from './read-sessions.js';

export interface PanelRow {
  id: number;
  name: string;
}

export interface SessionVersionRow {
  id: number;
  label: string;
  date: string;
  dataVersion: number;
}

export interface AttributeRow {
  id: number;
  name: string;
  scale: ScaleRange;
}

export interface ProductRow {
  code: string;
  role: 'test' | 'reference';
}

export function findPanel(db: Database, panelName: string): PanelRow | null {
  const row = db.prepare('SELECT id, name FROM panel WHERE name = ?').get(panelName) as PanelRow | undefined;
  return row ?? null;
}

/** Sessions of a panel in analysis order: date, ties broken by label (methods notes §3.1). */
export function listSessionVersions(db: Database, panelId: number): SessionVersionRow[] {
  return db
    .prepare(
      `SELECT id, label, session_date AS date, data_version AS dataVersion
         FROM session WHERE panel_id = ? ORDER BY session_date, label`,
    )
    .all(panelId) as SessionVersionRow[];
}

export function listAttributes(db: Database, panelId: number): AttributeRow[] {
  const rows = db
    .prepare('SELECT id, name, scale_min AS min, scale_max AS max FROM attribute WHERE panel_id = ? ORDER BY name')
    .all(panelId) as { id: number; name: string; min: number; max: number }[];
  return rows.map((r) => ({ id: r.id, name: r.name, scale: { min: r.min, max: r.max } }));
}

export function listProducts(db: Database, panelId: number): ProductRow[] {
  return db.prepare('SELECT code, role FROM product WHERE panel_id = ? ORDER BY code').all(panelId) as ProductRow[];
}

export function listAssessorCodes(db: Database, panelId: number): string[] {
  return (db.prepare('SELECT code FROM assessor WHERE panel_id = ? ORDER BY code').all(panelId) as { code: string }[]).map(
    (r) => r.code,
  );
}

/** One session's ratings as observations (plus the blind sample code), grouped by attribute name. */
export interface SessionRatings {
  session: SessionVersionRow;
  byAttribute: Map<string, (Observation & { code: string | null })[]>;
}

export function loadSessionRatings(db: Database, session: SessionVersionRow): SessionRatings {
  const rows = readSessionRatingRows(db, session.id, 'assessor-first');
  const byAttribute = new Map<string, (Observation & { code: string | null })[]>();
  for (const row of rows) {
    let list = byAttribute.get(row.attribute);
    if (!list) byAttribute.set(row.attribute, (list = []));
    list.push({ session: session.label, ...row });
  }
  return { session, byAttribute };
}

/** Sessions whose stored fits are missing or were computed from an older data version. */
export function listStaleSessions(db: Database, panelId: number, analysisVersion: string): SessionVersionRow[] {
  return db
    .prepare(
      `SELECT s.id, s.label, s.session_date AS date, s.data_version AS dataVersion
         FROM session s
        WHERE s.panel_id = ?
          AND (NOT EXISTS (SELECT 1 FROM session_quality q WHERE q.session_id = s.id)
               OR EXISTS (SELECT 1 FROM session_quality q WHERE q.session_id = s.id
                            AND (q.data_version <> s.data_version OR q.analysis_version <> ?)))
        ORDER BY s.session_date, s.label`,
    )
    .all(panelId, analysisVersion) as SessionVersionRow[];
}

export type { PackedRatings } from '../domain/packed-ratings.js';

/**
 * Empty packed columns for `n` ratings over the given name lists, with a writer that stores a
 * sample code (numbered in order of first appearance; null → -1).
 */
export function allocatePackedRatings(
  names: Pick<PackedRatings, 'sessions' | 'assessors' | 'products' | 'attributes'>,
  n: number,
): { packed: PackedRatings; setCode: (i: number, code: string | null) => void } {
  const packed: PackedRatings = {
    ...names,
    codes: [],
    sessionIndex: new Int32Array(n),
    assessorIndex: new Int32Array(n),
    productIndex: new Int32Array(n),
    attributeIndex: new Int32Array(n),
    codeIndex: new Int32Array(n),
    replicate: new Int32Array(n),
    value: new Float64Array(n),
  };
  const codeOf = new Map<string, number>();
  const setCode = (i: number, code: string | null): void => {
    if (code === null) {
      packed.codeIndex[i] = -1;
      return;
    }
    let c = codeOf.get(code);
    if (c === undefined) {
      c = packed.codes.length;
      codeOf.set(code, c);
      packed.codes.push(code);
    }
    packed.codeIndex[i] = c;
  };
  return { packed, setCode };
}

/** The packed ratings as Rating objects (in the worker, or for a page that needs them). */
export function unpackRatings(packed: PackedRatings): Rating[] {
  const out: Rating[] = new Array(packed.value.length);
  for (let i = 0; i < out.length; i++) {
    const session = packed.sessions[packed.sessionIndex[i]];
    const code = packed.codeIndex[i];
    out[i] = {
      session: session.label,
      date: session.date,
      assessor: packed.assessors[packed.assessorIndex[i]],
      product: packed.products[packed.productIndex[i]],
      replicate: packed.replicate[i],
      attribute: packed.attributes[packed.attributeIndex[i]],
      value: packed.value[i],
      code: code === -1 ? null : packed.codes[code],
    };
  }
  return out;
}

/** A finding of an import, or a quarantined cell still held (code = the quarantine reason). */
export type StoredFinding = Omit<InputFinding, 'code'> & { code: string };

/**
 * Findings that describe the data as stored now: those of the import that last wrote each
 * session (older imports' findings were replaced with the data), plus cells held in quarantine.
 */
export function loadCurrentFindings(db: Database, panelId: number): StoredFinding[] {
  return [...loadImportFindings(db, panelId), ...loadHeldFindings(db, panelId)];
}

/** Findings of the imports that last wrote each session (older imports' findings were replaced with the data). */
export function loadImportFindings(db: Database, panelId: number): StoredFinding[] {
  const imports = db
    .prepare(
      `SELECT i.id, i.report_json AS json FROM import i
        WHERE i.panel_id = ? AND EXISTS (SELECT 1 FROM session s WHERE s.import_id = i.id)`,
    )
    .all(panelId) as { id: number; json: string }[];
  const sessionsOf = db.prepare('SELECT label FROM session WHERE import_id = ?');
  const out: StoredFinding[] = [];
  for (const imp of imports) {
    const current = new Set((sessionsOf.all(imp.id) as { label: string }[]).map((r) => r.label));
    let findings: StoredFinding[] = [];
    try {
      findings = (JSON.parse(imp.json) as { findings?: StoredFinding[] }).findings ?? [];
    } catch {
      findings = []; // an unreadable report carries no findings
    }
    for (const f of findings) if (!f.session || current.has(f.session)) out.push(f);
  }
  return out;
}

/** Cells held in quarantine, as findings (code = the quarantine reason). */
export function loadHeldFindings(db: Database, panelId: number): StoredFinding[] {
  return db
    .prepare(
      `SELECT reason_code AS code, file_name AS file, row_number AS row, column_name AS "column", reason AS message,
              session_label AS session, assessor, product, attribute
         FROM quarantine WHERE panel_id = ? AND status = 'held' ORDER BY id`,
    )
    .all(panelId) as StoredFinding[];
}
