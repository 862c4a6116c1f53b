import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import type { Database } from 'better-sqlite3';
import { exportRatings, type ExportFormat } from '../../store/export-ratings.js';

/** A fresh temporary folder, removed by the returned function. */
export function tempFolder(prefix: string): { folder: string; remove: () => void } {
  const folder = mkdtempSync(join(tmpdir(), `ps-${prefix}-`));
  return { folder, remove: () => rmSync(folder, { recursive: true, force: true }) };
}

/** A Writable that collects everything written to it. */
export function collector(): { out: Writable; text: () => string } {
  const chunks: Buffer[] = [];
  const out = new Writable({
    write(chunk: Buffer | string, _encoding, callback) {
      chunks.push(Buffer.from(chunk));
      callback();
    },
  });
  return { out, text: () => Buffer.concat(chunks).toString('utf8') };
}

export async function exportText(db: Database, panel: string, format: ExportFormat = 'csv'): Promise<string> {
  const { out, text } = collector();
  await exportRatings(db, { panel, format }, out);
  return text();
}

export const countOf = (db: Database, table: string): number => (db.prepare(`SELECT count(*) AS n FROM ${table}`).get() as { n: number }).n;
