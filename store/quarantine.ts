import type { Database } from 'better-sqlite3';
import type { CellText } from '../domain/problems.js';

/** A quarantined cell cannot be released; the message says why and what to do. */
export class QuarantineError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'QuarantineError';
  }
}

export interface QuarantinedCell extends CellText {
  id: number;
  importId: number;
  panel: string;
  fileName: string;
  rowNumber: number | null;
  columnName: string | null;
  sampleCode: string | null;
  reasonCode: string;
  reason: string;
  status: 'held' | 'released' | 'discarded';
  resolvedAt: string | null;
  resolvedValue: number | null;
}

const SELECT_CELL = `
  SELECT q.id, q.import_id AS importId, p.name AS panel, q.file_name AS fileName, q.row_number AS rowNumber,
         q.column_name AS columnName, q.session_label AS session, q.session_date AS date, q.assessor, q.product,
         q.replicate, q.attribute, q.raw_value AS rawValue, q.sample_code AS sampleCode, q.reason_code AS reasonCode,
         q.reason, q.status, q.resolved_at AS resolvedAt, q.resolved_value AS resolvedValue
  FROM quarantine q JOIN panel p ON p.id = q.panel_id`;

/** Cells held for correction in a panel (status 'held' unless `all`), in file order. */
export function listQuarantined(db: Database, panel: string, options: { all?: boolean } = {}): QuarantinedCell[] {
  return db
    .prepare(`${SELECT_CELL} WHERE p.name = ? ${options.all ? '' : "AND q.status = 'held'"} ORDER BY q.import_id, q.row_number, q.column_name, q.id`)
    .all(panel) as QuarantinedCell[];
}

export function getQuarantined(db: Database, id: number): QuarantinedCell | undefined {
  return db.prepare(`${SELECT_CELL} WHERE q.id = ?`).get(id) as QuarantinedCell | undefined;
}

const ISO_DATE = /^\d{4}-\d{2}-\d{2}$/;

export interface ReleaseResult {
  cell: QuarantinedCell;
  ratingId: number;
  sessionCreated: boolean;
}

/**
 * Releases a held cell with a corrected value: the value is checked against the attribute's
 * stored scale and inserted as a rating of the session (created when it does not exist yet),
 * the session's data version is bumped (fits made before are stale), and the quarantine row
 * records the value and time. Only the value can be corrected here: a cell whose session,
 * date, assessor, product, replicate or attribute is unusable must be fixed in the file.
 */
export function releaseQuarantined(db: Database, id: number, correctedValue: number, now: () => Date = () => new Date()): ReleaseResult {
  return db
    .transaction((): ReleaseResult => {
      const cell = getQuarantined(db, id);
      if (!cell) throw new QuarantineError(`There is no quarantined cell #${id}.`);
      if (cell.status !== 'held') throw new QuarantineError(`Quarantined cell #${id} was already ${cell.status}.`);
      if (typeof correctedValue !== 'number' || !Number.isFinite(correctedValue)) {
        throw new QuarantineError('The corrected value must be a finite number.');
      }
      const where = `row ${cell.rowNumber ?? '?'} of ${cell.fileName}`;
      const replicate = Number(cell.replicate);
      if (!cell.session || !cell.assessor || !cell.product || !cell.attribute || !Number.isInteger(replicate) || replicate < 1) {
        throw new QuarantineError(`The cell from ${where} lacks a usable session, assessor, product, replicate or attribute; correct the file and import it again.`);
      }
      const panelId = (db.prepare('SELECT id FROM panel WHERE name = ?').get(cell.panel) as { id: number }).id;
      const attribute = db.prepare('SELECT id, scale_min AS min, scale_max AS max FROM attribute WHERE panel_id = ? AND name = ?').get(panelId, cell.attribute) as
        | { id: number; min: number; max: number }
        | undefined;
      if (!attribute) {
        throw new QuarantineError(`Attribute "${cell.attribute}" has no scale in panel "${cell.panel}" yet; import it with a scale first.`);
      }
      if (correctedValue < attribute.min || correctedValue > attribute.max) {
        throw new QuarantineError(`${correctedValue} is outside the scale of "${cell.attribute}" (${attribute.min} to ${attribute.max}).`);
      }
      let session = db.prepare('SELECT id, session_date AS date FROM session WHERE panel_id = ? AND label = ?').get(panelId, cell.session) as
        | { id: number; date: string }
        | undefined;
      if (session && cell.date && session.date !== cell.date) {
        throw new QuarantineError(`Session "${cell.session}" is stored with date ${session.date}, not ${cell.date}; correct the file and import it again.`);
      }
      const nowIso = now().toISOString();
      let sessionCreated = false;
      if (!session) {
        if (!cell.date || !ISO_DATE.test(cell.date)) {
          throw new QuarantineError(`The cell from ${where} has no valid session date; correct the file and import it again.`);
        }
        session = db.prepare('INSERT INTO session (panel_id, label, session_date, import_id) VALUES (?, ?, ?, ?) RETURNING id, session_date AS date').get(
          panelId,
          cell.session,
          cell.date,
          cell.importId,
        ) as { id: number; date: string };
        sessionCreated = true;
      }
      const upsertName = (table: 'assessor' | 'product', code: string): number =>
        (db.prepare(`INSERT INTO ${table} (panel_id, code) VALUES (?, ?) ON CONFLICT (panel_id, code) DO UPDATE SET code = excluded.code RETURNING id`).get(panelId, code) as { id: number }).id;
      const assessorId = upsertName('assessor', cell.assessor);
      const productId = upsertName('product', cell.product);
      const existing = db
        .prepare('SELECT value FROM rating WHERE session_id = ? AND attribute_id = ? AND assessor_id = ? AND product_id = ? AND replicate = ?')
        .get(session.id, attribute.id, assessorId, productId, replicate) as { value: number } | undefined;
      if (existing) {
        throw new QuarantineError(
          `Session "${cell.session}" already has ${existing.value} for assessor ${cell.assessor}, product ${cell.product}, replicate ${replicate}, attribute ${cell.attribute}; discard this cell or import a corrected file.`,
        );
      }
      const rating = db
        .prepare(
          `INSERT INTO rating (session_id, assessor_id, product_id, attribute_id, replicate, value, sample_code, import_id)
           VALUES (?, ?, ?, ?, ?, ?, ?, ?)`,
        )
        .run(session.id, assessorId, productId, attribute.id, replicate, correctedValue, cell.sampleCode, cell.importId);
      if (!sessionCreated) db.prepare('UPDATE session SET data_version = data_version + 1 WHERE id = ?').run(session.id);
      db.prepare("UPDATE quarantine SET status = 'released', resolved_at = ?, resolved_value = ? WHERE id = ?").run(nowIso, correctedValue, id);
      return { cell: getQuarantined(db, id) as QuarantinedCell, ratingId: Number(rating.lastInsertRowid), sessionCreated };
    })
    .immediate();
}

/** Marks a held cell as discarded (kept for the record, never analysed). */
export function discardQuarantined(db: Database, id: number, now: () => Date = () => new Date()): QuarantinedCell {
  return db
    .transaction(() => {
      const cell = getQuarantined(db, id);
      if (!cell) throw new QuarantineError(`There is no quarantined cell #${id}.`);
      if (cell.status !== 'held') throw new QuarantineError(`Quarantined cell #${id} was already ${cell.status}.`);
      db.prepare("UPDATE quarantine SET status = 'discarded', resolved_at = ? WHERE id = ?").run(now().toISOString(), id);
      return getQuarantined(db, id) as QuarantinedCell;
    })
    .immediate();
}
