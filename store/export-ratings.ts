import { once } from 'node:events';
import type { Writable } from 'node:stream';
import BetterSqlite3 from 'better-sqlite3';
import type { Database } from 'better-sqlite3';
import { LONG_COLUMNS, type Rating } from '../domain/ratings.js';
import { csvRecord, csvRecords } from '../ingest/csv-writer.js';

export type ExportFormat = 'csv' | 'json';

export interface ExportRequest {
  panel: string;
  format: ExportFormat;
}

export interface ExportResult {
  panel: string;
  nRatings: number;
}

export class PanelNotFoundError extends Error {
  constructor(readonly panel: string) {
    super(`There is no panel named "${panel}" in this store.`);
    this.name = 'PanelNotFoundError';
  }
}

/**
 * Stored ratings in long form, ordered by session date, session, attribute, assessor,
 * product, replicate (byte-for-byte the same export for the same stored data).
 */
const EXPORT_SQL = `
  SELECT s.label AS session, s.session_date AS date, a.code AS assessor, p.code AS product,
         r.replicate AS replicate, t.name AS attribute, r.value AS value, r.sample_code AS code
  FROM rating r
  JOIN session s ON s.id = r.session_id
  JOIN assessor a ON a.id = r.assessor_id
  JOIN product p ON p.id = r.product_id
  JOIN attribute t ON t.id = r.attribute_id
  WHERE s.panel_id = ?
  ORDER BY s.session_date, s.label, t.name, a.code, p.code, r.replicate`;

/** Rows per write: small enough to keep memory flat, large enough to keep overhead low. */
const CHUNK_ROWS = 2000;

/**
 * Writes a panel's stored ratings to `out` (which is not ended). CSV goes through the one CSV
 * writer (ingest/csv-writer.ts): numbers in their shortest round-trip form, text cells that a
 * spreadsheet would run as formulas prefixed with an apostrophe (the reader strips it).
 *
 * On a file store the rows are read through a second, read-only connection inside one read
 * transaction: the export is a consistent snapshot even while imports commit, and waiting
 * for a slow reader (back-pressure) never blocks the shared connection.
 */
export async function exportRatings(db: Database, request: ExportRequest, out: Writable): Promise<ExportResult> {
  const panelRow = db.prepare('SELECT id FROM panel WHERE name = ?').get(request.panel) as { id: number } | undefined;
  if (!panelRow) throw new PanelNotFoundError(request.panel);
  const reader = db.memory ? db : new BetterSqlite3(db.name, { readonly: true, fileMustExist: true });
  let nRatings = 0;
  try {
    if (reader !== db) reader.exec('BEGIN');
    const statement = reader.prepare(EXPORT_SQL);
    const format = request.format === 'csv' ? csvChunk : jsonChunk;
    if (request.format === 'csv') await write(out, csvRecord(LONG_COLUMNS, { recordDelimiter: '\n' }));
    else await write(out, '[');
    let chunk: Rating[] = [];
    const flush = async (): Promise<void> => {
      if (chunk.length === 0) return;
      const text = format(chunk, nRatings === chunk.length);
      chunk = [];
      await write(out, text);
    };
    if (reader === db) {
      // An in-memory store has one connection: read everything first (only small test stores).
      for (const row of statement.all(panelRow.id) as Rating[]) {
        chunk.push(row);
        nRatings += 1;
        if (chunk.length >= CHUNK_ROWS) await flush();
      }
    } else {
      for (const row of statement.iterate(panelRow.id) as IterableIterator<Rating>) {
        chunk.push(row);
        nRatings += 1;
        if (chunk.length >= CHUNK_ROWS) await flush();
      }
    }
    await flush();
    if (request.format === 'json') await write(out, nRatings === 0 ? ']\n' : '\n]\n');
  } finally {
    if (reader !== db) reader.close();
  }
  return { panel: request.panel, nRatings };
}

function csvChunk(rows: Rating[]): string {
  return csvRecords(
    rows.map((r) => [r.session, r.date, r.assessor, r.product, r.replicate, r.attribute, r.value, r.code]),
    { recordDelimiter: '\n' },
  );
}

function jsonChunk(rows: Rating[], first: boolean): string {
  return (first ? '\n' : ',\n') + rows.map((r) => JSON.stringify(pickLong(r))).join(',\n');
}

function pickLong(r: Rating): Rating {
  return { session: r.session, date: r.date, assessor: r.assessor, product: r.product, replicate: r.replicate, attribute: r.attribute, value: r.value, code: r.code };
}

async function write(out: Writable, text: string): Promise<void> {
  if (!out.write(text)) await once(out, 'drain');
}
