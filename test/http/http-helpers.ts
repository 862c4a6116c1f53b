/** Shared set-up for the HTTP tests: a fresh in-memory store behind a fresh app. */
import { stringify } from 'csv-stringify/sync';
import type { FastifyInstance, LightMyRequestResponse } from 'fastify';
import { afterEach } from 'vitest';
import { buildApp, type AppConfig } from '../../server/app.js';
import { openStore, type Database } from '../../store/open-store.js';

export interface TestApp {
  app: FastifyInstance;
  db: Database;
  close: () => Promise<void>;
}

export async function makeTestApp(config: Partial<AppConfig> = {}): Promise<TestApp> {
  const db = openStore(':memory:');
  const app = await buildApp({ db, config });
  return {
    app,
    db,
    close: async () => {
      await app.close();
      db.close();
    },
  };
}

/** For a test file: `const fresh = freshApps();` then `await fresh(config)` in each test; all closed after each. */
export function freshApps(): (config?: Partial<AppConfig>) => Promise<TestApp> {
  const open: TestApp[] = [];
  afterEach(async () => {
    for (const t of open.splice(0)) await t.close();
  });
  return async (config = {}) => {
    const t = await makeTestApp(config);
    open.push(t);
    return t;
  };
}

export const LONG_HEADER = 'session,date,assessor,product,replicate,attribute,value';

/** Long-form CSV text from rows of [session, date, assessor, product, replicate, attribute, value]. */
export function longCsv(rows: (string | number)[][], header = LONG_HEADER): string {
  return `${header}\n${rows.map((row) => row.join(',')).join('\n')}\n`;
}

/** Long-form CSV with proper quoting, for names holding quotes or commas. */
export function quotedLongCsv(rows: (string | number)[][]): string {
  return stringify(rows, { header: true, columns: LONG_HEADER.split(',') });
}

/**
 * A small, hand-checkable session: 2 assessors × 2 products × 2 replicates on one attribute,
 * with one cell (A02, P2, replicate 2) missing, so 7 of 8 cells are present.
 *   P1: 3, 4 (A01) and 5, 6 (A02) → mean 18 / 4 = 4.5
 *   P2: 7, 8 (A01) and 9 (A02)    → mean 24 / 3 = 8
 */
export const SMALL_SESSION_ROWS: (string | number)[][] = [
  ['W01', '2026-01-05', 'A01', 'P1', 1, 'sweetness', 3],
  ['W01', '2026-01-05', 'A01', 'P1', 2, 'sweetness', 4],
  ['W01', '2026-01-05', 'A02', 'P1', 1, 'sweetness', 5],
  ['W01', '2026-01-05', 'A02', 'P1', 2, 'sweetness', 6],
  ['W01', '2026-01-05', 'A01', 'P2', 1, 'sweetness', 7],
  ['W01', '2026-01-05', 'A01', 'P2', 2, 'sweetness', 8],
  ['W01', '2026-01-05', 'A02', 'P2', 1, 'sweetness', 9],
];

/** POSTs CSV text as a text/csv body to the import API. */
export function postCsv(app: FastifyInstance, panel: string, csv: string, query = 'scaleMin=0&scaleMax=10'): Promise<LightMyRequestResponse> {
  return app.inject({
    method: 'POST',
    url: `/api/panels/${encodeURIComponent(panel)}/imports?fileName=test.csv&${query}`,
    headers: { 'content-type': 'text/csv' },
    payload: csv,
  });
}

/** A multipart form with text fields and (optionally) a file in field "file". */
export function formData(fields: Record<string, string>, file?: { name: string; content: string | Buffer; type?: string }): FormData {
  const form = new FormData();
  for (const [name, value] of Object.entries(fields)) form.append(name, value);
  if (file) {
    const bytes = typeof file.content === 'string' ? Buffer.from(file.content, 'utf8') : file.content;
    form.append('file', new Blob([bytes], { type: file.type ?? 'text/csv' }), file.name);
  }
  return form;
}

/** The CSRF token in a rendered form, and the cookie header that goes with it. */
export function csrfFrom(response: LightMyRequestResponse): { token: string; cookie: string } {
  const match = /name="_csrf" value="([^"]+)"/.exec(response.body);
  if (!match) throw new Error('no CSRF token in the page');
  const cookies = response.cookies.map((cookie) => `${cookie.name}=${cookie.value}`).join('; ');
  return { token: match[1], cookie: cookies };
}
