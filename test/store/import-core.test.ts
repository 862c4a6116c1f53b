import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { importRatingEvents, type ImportEventsRequest } from '../../store/import-core.js';
import { openStore, type Database } from '../../store/open-store.js';
import { readLongCsvText } from './fake-reader.js';

const HEADER = 'session,date,assessor,product,replicate,attribute,value';
const base: Omit<ImportEventsRequest, 'sha256'> = { panel: 'crisps', fileName: 'week.csv', source: 'cli', quarantine: false, scale: { min: 0, max: 10 } };

let folder: string;
let db: Database;
beforeEach(() => {
  folder = mkdtempSync(join(tmpdir(), 'ps-core-'));
  db = openStore(join(folder, 'store.db'));
});
afterEach(() => {
  db.close();
  rmSync(folder, { recursive: true, force: true });
});

const run = (lines: string[], extra: Partial<ImportEventsRequest> = {}) =>
  importRatingEvents(db, { ...base, sha256: String(Math.random()), ...extra }, readLongCsvText([HEADER, ...lines].join('\n')));

describe('importRatingEvents', () => {
  it('stores a clean file and reports counts', async () => {
    const report = await run(['S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-05,A1,P2,1,sweet,6.5', 'S2,2026-01-12,A1,P1,1,sweet,4']);
    expect(report.outcome).toBe('imported');
    expect(report.counts).toMatchObject({ rows: 3, ratings: 3, sessions: 2, sessionsNew: 2 });
    expect(db.prepare('SELECT count(*) AS n FROM rating').get()).toEqual({ n: 3 });
  });

  it('finds exact duplicates (kept once) and conflicting duplicates (rejected, both rows named)', async () => {
    const dup = await run(['S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-05,A1,P1,1,sweet,5']);
    expect(dup.outcome).toBe('imported');
    expect(dup.findings.map((f) => [f.code, f.row])).toEqual([['duplicate-row', 3]]);
    expect(dup.counts.ratings).toBe(1);
    const conflict = await run(['S9,2026-01-05,A1,P1,1,sweet,5', 'S9,2026-01-05,A1,P1,1,sweet,7']);
    expect(conflict.outcome).toBe('rejected');
    expect(conflict.errors[0]).toMatchObject({ code: 'conflicting-duplicate', row: 3, column: 'value' });
    expect(conflict.errors[0].message).toContain('row 2');
    expect(db.prepare("SELECT count(*) AS n FROM session WHERE label = 'S9'").get()).toEqual({ n: 0 });
  });
});
