import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { importRatingEvents, type ImportEventsRequest } from '../../store/import-core.js';
import { openStore, type Database } from '../../store/open-store.js';
import { discardQuarantined, listQuarantined, releaseQuarantined } from '../../store/quarantine.js';
import { readLongCsvText } from './fake-reader.js';
import { countOf } from './helpers.js';

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

describe('staging in multi-row pieces', () => {
  // 1,501 ratings: one chunk of 1,024 rows, then the rest in pieces of 256, 128, 64, 16, 8, 4 and 1 rows.
  const lines = (): string[] => {
    const out: string[] = [];
    for (let a = 1; a <= 15; a++) for (let p = 1; p <= 10; p++) for (let t = 1; t <= 10; t++) out.push(`S1,2026-01-05,A${a},P${p},1,att${t},${(a + p + t) % 10}`);
    return out;
  };

  it('an exact duplicate inside a short piece is counted once and named', async () => {
    const file = lines();
    file.splice(1300, 0, file[100]); // row 1302 repeats row 102
    const report = await run(file);
    expect(report.outcome).toBe('imported');
    expect(report.counts.ratings).toBe(1500);
    expect(report.findings.map((f) => [f.code, f.row])).toEqual([['duplicate-row', 1302]]);
    expect(db.prepare('SELECT count(*) AS n FROM rating').get()).toEqual({ n: 1500 });
  });

  it('a conflicting duplicate inside a short piece rejects the file, naming both rows', async () => {
    const file = lines();
    file.splice(1450, 0, file[7].replace(/,\d$/, ',9.5')); // row 1452 contradicts row 9
    const report = await run(file);
    expect(report.outcome).toBe('rejected');
    expect(report.errors.map((e) => [e.code, e.row])).toEqual([['conflicting-duplicate', 1452]]);
    expect(report.errors[0].message).toContain('row 9');
    expect(db.prepare('SELECT count(*) AS n FROM rating').get()).toEqual({ n: 0 });
  });
});

describe('sessions already stored', () => {
  it('leaves an identical session alone, replaces a changed one and keeps the old values', async () => {
    const first = await run(['S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-05,A1,P2,1,sweet,6', 'S2,2026-01-12,A1,P1,1,sweet,4']);
    expect(first.outcome).toBe('imported');
    const version = () => db.prepare("SELECT data_version AS v FROM session WHERE label = 'S1'").get();
    expect(version()).toEqual({ v: 1 });
    // S1: one value changed, one cell gone, one added; S2 identical.
    const second = await run(['S1,2026-01-05,A1,P1,1,sweet,5.5', 'S1,2026-01-05,A2,P1,1,sweet,3', 'S2,2026-01-12,A1,P1,1,sweet,4']);
    expect(second.outcome).toBe('imported');
    expect(second.counts).toMatchObject({ sessions: 2, sessionsNew: 0, sessionsReplaced: 1, sessionsUnchanged: 1, valuesReplaced: 2 });
    expect(second.changedSessions).toEqual(['S1']);
    expect(version()).toEqual({ v: 2 });
    const corrections = db
      .prepare(
        `SELECT a.code AS assessor, p.code AS product, c.old_value AS oldValue, c.new_value AS newValue, c.old_import_id AS oldImport, c.replaced_by_import_id AS byImport
         FROM rating_correction c JOIN assessor a ON a.id = c.assessor_id JOIN product p ON p.id = c.product_id ORDER BY p.code`,
      )
      .all();
    expect(corrections).toEqual([
      { assessor: 'A1', product: 'P1', oldValue: 5, newValue: 5.5, oldImport: first.importId, byImport: second.importId },
      { assessor: 'A1', product: 'P2', oldValue: 6, newValue: null, oldImport: first.importId, byImport: second.importId },
    ]);
    const s1 = db.prepare("SELECT r.value FROM rating r JOIN session s ON s.id = r.session_id WHERE s.label = 'S1' ORDER BY r.value").all();
    expect(s1).toEqual([{ value: 3 }, { value: 5.5 }]);
    // The same content from another file: nothing changes, and the report says so.
    const third = await run(['S2,2026-01-12,A1,P1,1,sweet,4']);
    expect(third.outcome).toBe('unchanged');
    expect(third.message).toContain('nothing changed');
  });

  it('rejects a session label reused with another date, in the file and against the store', async () => {
    const inFile = await run(['S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-06,A1,P2,1,sweet,6']);
    expect(inFile.outcome).toBe('rejected');
    expect(inFile.errors).toEqual([expect.objectContaining({ code: 'session-date-conflict', row: 3, column: 'date' })]);
    await run(['S1,2026-01-05,A1,P1,1,sweet,5']);
    const againstStore = await run(['S1,2026-02-05,A1,P1,1,sweet,5']);
    expect(againstStore.outcome).toBe('rejected');
    expect(againstStore.errors[0]).toMatchObject({ code: 'session-date-conflict', row: 2, column: 'date' });
    expect(againstStore.errors[0].message).toContain('stored with date 2026-01-05');
  });

  it('asks for a scale for new attributes and says how to give it; stored attributes keep theirs', async () => {
    const noScale = await run(['S1,2026-01-05,A1,P1,1,sweet,5'], { scale: undefined });
    expect(noScale.outcome).toBe('rejected');
    expect(noScale.errors[0]).toMatchObject({ code: 'scale-missing', row: 2 });
    expect(noScale.errors[0].message).toMatch(/--scale MIN:MAX.*upload form.*--settings panel\.json/);
    // A new panel: the rejection writes nothing, not even the panel or an import-log row.
    expect(noScale.importId).toBeNull();
    expect(countOf(db, 'panel')).toBe(0);
    expect(countOf(db, 'import')).toBe(0);
    await run(['S1,2026-01-05,A1,P1,1,sweet,5'], { scale: { min: 0, max: 15 } });
    const later = await run(['S2,2026-01-12,A1,P1,1,sweet,5', 'S2,2026-01-12,A1,P1,1,salty,5'], {
      scale: undefined,
      settings: { attributes: { salty: { min: 1, max: 9, anchorLow: 'none', anchorHigh: 'very' } } },
    });
    expect(later.outcome).toBe('imported');
    expect(db.prepare('SELECT name, scale_min AS min, scale_max AS max, anchor_low AS low FROM attribute ORDER BY name').all()).toEqual([
      { name: 'salty', min: 1, max: 9, low: 'none' },
      { name: 'sweet', min: 0, max: 15, low: null },
    ]);
    // The panel exists now: a rejection is kept in its import log (and nothing else is written).
    const again = await run(['S3,2026-01-19,A1,P1,1,bitter,5'], { scale: undefined });
    expect(again.outcome).toBe('rejected');
    expect(db.prepare('SELECT outcome FROM import WHERE id = ?').get(again.importId)).toEqual({ outcome: 'rejected' });
    expect(countOf(db, 'attribute')).toBe(2);
  });
});

describe('quarantine', () => {
  it('stores the valid rows, holds the bad cells with their reason, and releases a corrected one', async () => {
    const lines = ['S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-05,A1,P2,1,sweet,abc', 'S1,2026-01-05,A2,P1,1,sweet,4', 'S1,2026-01-05,A2,P1,1,sweet,6'];
    const rejected = await run(lines);
    expect(rejected.outcome).toBe('rejected');
    expect(rejected.totalErrors).toBe(2);
    expect(countOf(db, 'rating')).toBe(0);
    const held = await run(lines, { quarantine: true });
    expect(held.outcome).toBe('quarantined');
    expect(held.ok).toBe(true);
    expect(held.counts).toMatchObject({ ratings: 1, quarantined: 3 });
    expect(countOf(db, 'rating')).toBe(1);
    const cells = listQuarantined(db, 'crisps');
    expect(cells.map((c) => [c.rowNumber, c.reasonCode, c.rawValue])).toEqual([
      [3, 'not-a-number', 'abc'],
      [4, 'conflicting-duplicate', '4.0'],
      [5, 'conflicting-duplicate', '6'],
    ]);
    expect(() => releaseQuarantined(db, cells[0].id, 11)).toThrow(/outside the scale/);
    const released = releaseQuarantined(db, cells[0].id, 5.5);
    expect(released.cell).toMatchObject({ status: 'released', resolvedValue: 5.5 });
    expect(() => releaseQuarantined(db, cells[0].id, 5.5)).toThrow(/already released/);
    expect(db.prepare("SELECT data_version AS v FROM session WHERE label = 'S1'").get()).toEqual({ v: 2 });
    releaseQuarantined(db, cells[2].id, 6);
    expect(() => releaseQuarantined(db, cells[1].id, 4)).toThrow(/already has 6/);
    expect(discardQuarantined(db, cells[1].id).status).toBe('discarded');
    expect(listQuarantined(db, 'crisps')).toEqual([]);
    expect(countOf(db, 'rating')).toBe(3);
  });
});

describe('quarantine of sessions with a date conflict', () => {
  it('holds every cell of the session (in the file or against the store) and stores the other sessions', async () => {
    await run(['S0,2026-01-01,A1,P1,1,sweet,5']);
    const report = await run(
      ['S0,2026-01-02,A1,P1,1,sweet,6', 'S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-06,A2,P1,1,sweet,6', 'S2,2026-01-12,A1,P1,1,sweet,4'],
      { quarantine: true },
    );
    expect(report.outcome).toBe('quarantined');
    expect(report.counts).toMatchObject({ sessions: 3, sessionsNew: 1, ratings: 1, quarantined: 3 });
    expect(report.changedSessions).toEqual(['S2']);
    expect(listQuarantined(db, 'crisps').map((c) => [c.session, c.rowNumber, c.reasonCode])).toEqual([
      ['S0', 2, 'session-date-conflict'],
      ['S1', 3, 'session-date-conflict'],
      ['S1', 4, 'session-date-conflict'],
    ]);
    // The stored S0 is untouched.
    expect(db.prepare("SELECT r.value, s.session_date AS date FROM rating r JOIN session s ON s.id = r.session_id WHERE s.label = 'S0'").all()).toEqual([{ value: 5, date: '2026-01-01' }]);
  });
});

/**
 * The write transaction runs with foreign-key checks switched off (for speed; see
 * import-core.ts). What that relies on: every row it writes still satisfies the schema's
 * foreign keys (SQLite's own PRAGMA foreign_key_check, over the whole store), and the
 * connection's setting is restored after an import, a rejection and a quarantine, and left
 * alone on a connection that had the checks off.
 */
const foreignKeysOn = (): boolean => db.pragma('foreign_keys', { simple: true }) === 1;

describe('write transaction without per-row foreign-key checks', () => {
  it('new, replaced and quarantined sessions leave no dangling reference, and the checks are back on', async () => {
    expect(foreignKeysOn()).toBe(true);
    expect((await run(['S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-05,A2,P2,2,salty,6', 'S2,2026-01-12,A1,P1,1,sweet,4'])).outcome).toBe('imported');
    expect(foreignKeysOn()).toBe(true);
    // S1 changed (one value replaced, one removed: correction history rows), S3 new with a new
    // assessor, product and attribute.
    expect((await run(['S1,2026-01-05,A1,P1,1,sweet,5.5', 'S3,2026-01-19,A9,P9,1,bitter,2'])).outcome).toBe('imported');
    expect((await run(['S4,2026-01-26,A1,P1,1,sweet,5', 'S4,2026-01-26,A1,P1,2,sweet,x'], { quarantine: true })).outcome).toBe('quarantined');
    expect(foreignKeysOn()).toBe(true);
    expect(db.pragma('foreign_key_check')).toEqual([]);
    expect(db.prepare('SELECT count(*) AS n FROM rating').get()).toEqual({ n: 4 });
    expect(db.prepare('SELECT count(*) AS n FROM rating_correction').get()).toEqual({ n: 2 });
  });

  it('ids chosen for all-new names and joined for known ones point at the right rows, in one panel and across panels', async () => {
    // First import: every kind new (ids by offset). Second panel: all new again, above the first's ids.
    expect((await run(['S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-05,A2,P2,1,sweet,6'])).outcome).toBe('imported');
    expect((await run(['T1,2026-01-05,B1,Q1,1,sour,3'], { panel: 'second' })).outcome).toBe('imported');
    // Mixed: a known assessor with a new one, new products, a new attribute, a new session, a settings-only product.
    const mixed = await run(['S2,2026-01-12,A1,P9,1,salty,7', 'S2,2026-01-12,A3,P9,2,salty,8', 'S2,2026-01-12,A3,P1,1,sweet,1'], {
      settings: { products: { REF: { name: 'reference', role: 'reference' } } },
    });
    expect(mixed.outcome).toBe('imported');
    // Replaced session (its id is kept) next to a new one.
    expect((await run(['S1,2026-01-05,A1,P1,1,sweet,4.5', 'S3,2026-01-19,A4,P1,1,sweet,2'])).outcome).toBe('imported');
    expect(db.pragma('foreign_key_check')).toEqual([]);
    const named = db
      .prepare(
        `SELECT p.name AS panel, s.label, a.code AS assessor, pr.code AS product, at.name AS attribute, r.replicate, r.value
         FROM rating r JOIN session s ON s.id = r.session_id JOIN panel p ON p.id = s.panel_id
         JOIN assessor a ON a.id = r.assessor_id AND a.panel_id = p.id JOIN product pr ON pr.id = r.product_id AND pr.panel_id = p.id
         JOIN attribute at ON at.id = r.attribute_id AND at.panel_id = p.id
         ORDER BY p.name, s.label, a.code, pr.code, at.name, r.replicate`,
      )
      .all()
      .map((row) => Object.values(row as object).join(' '));
    expect(named).toEqual([
      'crisps S1 A1 P1 sweet 1 4.5',
      'crisps S3 A4 P1 sweet 1 2',
      'crisps S2 A1 P9 salty 1 7',
      'crisps S2 A3 P1 sweet 1 1',
      'crisps S2 A3 P9 salty 2 8',
      'second T1 B1 Q1 sour 1 3',
    ].sort((x, y) => x.localeCompare(y)));
    expect(db.prepare("SELECT role FROM product WHERE code = 'REF'").get()).toEqual({ role: 'reference' });
  });

  it('a rejected import leaves the checks on', async () => {
    const report = await run(['S1,2026-01-05,A1,P1,1,sweet,5', 'S1,2026-01-12,A1,P1,2,sweet,5']);
    expect(report.outcome).toBe('rejected');
    expect(foreignKeysOn()).toBe(true);
  });

  it('a connection that had the checks off keeps them off', async () => {
    db.pragma('foreign_keys = OFF');
    expect((await run(['S1,2026-01-05,A1,P1,1,sweet,5'])).outcome).toBe('imported');
    expect(foreignKeysOn()).toBe(false);
  });
});
