import { copyFileSync, existsSync, mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { backupStore, BackupError, integrityCheck, restoreStore } from '../../store/backup.js';
import { fileInput, importRatings } from '../../store/import-ratings.js';
import { openStore, type Database } from '../../store/open-store.js';
import { listMigrations, migrate } from '../../store/migrate.js';
import { packageRoot } from '../../store/package-root.js';
import { exportText, tempFolder } from './helpers.js';
import { writeSyntheticLongCsv } from './synthetic-ratings.js';

let folder: string;
let remove: () => void;
let db: Database;
beforeEach(async () => {
  ({ folder, remove } = tempFolder('backup'));
  db = openStore(join(folder, 'live.db'));
  const path = join(folder, 'base.csv');
  await writeSyntheticLongCsv(path, { sessions: 20, assessors: 12, products: 6, replicates: 2, attributes: 10, seed: 11 });
  await importRatings(db, { panel: 'crisps', fileName: 'base.csv', source: 'cli', input: fileInput(path), scale: { min: 0, max: 10 }, quarantine: false });
});
afterEach(() => {
  db.close();
  remove();
});

describe('online backup', () => {
  it('gives a consistent copy while another connection commits multi-row transactions', async () => {
    const writer = openStore(join(folder, 'live.db'));
    const perSession = (conn: Database) =>
      conn.prepare('SELECT s.label, count(r.id) AS n FROM session s LEFT JOIN rating r ON r.session_id = s.id GROUP BY s.id ORDER BY s.label').all() as { label: string; n: number }[];
    // One import-like transaction from the other connection: an import row, a session, 72 ratings.
    const commitSession = writer.transaction((i: number) => {
      const panelId = (writer.prepare("SELECT id FROM panel WHERE name = 'crisps'").get() as { id: number }).id;
      const importId = Number(
        writer
          .prepare("INSERT INTO import (panel_id, file_name, content_sha256, source, started_at, outcome) VALUES (?, ?, ?, 'cli', ?, 'imported')")
          .run(panelId, `extra-${i}.csv`, `hash-${i}`, new Date().toISOString()).lastInsertRowid,
      );
      const sessionId = Number(writer.prepare("INSERT INTO session (panel_id, label, session_date, import_id) VALUES (?, ?, '2027-01-04', ?)").run(panelId, `X${i}`, importId).lastInsertRowid);
      writer
        .prepare(
          `INSERT INTO rating (session_id, assessor_id, product_id, attribute_id, replicate, value, import_id)
           SELECT ?, a.id, p.id, t.id, 1, 5, ? FROM assessor a, product p, attribute t WHERE t.name = 'crunchiness'`,
        )
        .run(sessionId, importId);
    });
    // Small steps so the copy takes many steps; the other connection commits during the first
    // ones (each commit makes SQLite restart the copy, which then finishes on a quiet store).
    let commits = 0;
    const out = join(folder, 'copy.db');
    const result = await backupStore(db, out, {
      pagesPerStep: 2,
      onStep: () => {
        if (commits < 5) commitSession(commits++);
      },
    });
    writer.close();
    expect(commits).toBe(5);
    const copy = new BetterSqlite3(out, { readonly: true });
    try {
      expect(integrityCheck(copy)).toEqual(['ok']);
      expect(copy.pragma('journal_mode', { simple: true })).toBe('delete');
      // A committed state: every session whole (1440 base, 72 extra), imports and sessions agree.
      const sessions = perSession(copy);
      for (const s of sessions) expect(s.n).toBe(s.label.startsWith('X') ? 72 : 1440);
      expect(sessions.filter((s) => s.label.startsWith('X'))).toHaveLength(5);
      const nImports = (copy.prepare("SELECT count(*) AS n FROM import WHERE outcome = 'imported'").get() as { n: number }).n;
      expect(nImports).toBe(1 + sessions.filter((s) => s.label.startsWith('X')).length);
      expect(result.nRatings).toBe(sessions.reduce((sum, s) => sum + s.n, 0));
    } finally {
      copy.close();
    }
  });

  it('restore gives an identical export, refuses damaged files, and keeps the replaced store', async () => {
    const before = await exportText(db, 'crisps');
    const out = join(folder, 'b.db');
    await backupStore(db, out);
    const target = join(folder, 'target.db');
    await restoreStore(out, target);
    const restored = openStore(target);
    expect(await exportText(restored, 'crisps')).toBe(before);
    restored.close();

    const damaged = join(folder, 'damaged.db');
    writeFileSync(damaged, 'SQLite format 3\u0000 but not really');
    await expect(restoreStore(damaged, target, { force: true })).rejects.toThrow(BackupError);
    await expect(restoreStore(join(folder, 'missing.db'), target)).rejects.toThrow(/does not exist/);

    const forced = await restoreStore(out, target, { force: true, now: () => new Date('2026-03-01T10:00:00Z') });
    expect(forced.previousSavedAs).toMatch(/target\.db\.before-restore-2026-03-01T10-00-00-000Z$/);
    expect(existsSync(forced.previousSavedAs!)).toBe(true);
  });
});

describe('restore checks what it restores', () => {
  it('refuses a plain SQLite database, a look-alike with the wrong columns, and a store from a newer version', async () => {
    const target = join(folder, 'target.db');
    const plain = join(folder, 'plain.db');
    const p = new BetterSqlite3(plain);
    p.exec('CREATE TABLE notes (id INTEGER PRIMARY KEY, body TEXT); INSERT INTO notes (body) VALUES (\'hello\');');
    p.close();
    await expect(restoreStore(plain, target)).rejects.toThrow(/plain\.db cannot be restored: the file is an SQLite database but not a panel-steward store/);

    // Tables with the store's names but not its columns (the case that used to pass).
    const lookalike = join(folder, 'lookalike.db');
    const l = new BetterSqlite3(lookalike);
    l.exec("CREATE TABLE schema_migrations (name TEXT PRIMARY KEY, applied_at TEXT); INSERT INTO schema_migrations VALUES ('0001_store.sql', 'x'); CREATE TABLE panel (id INTEGER PRIMARY KEY); CREATE TABLE rating (id INTEGER PRIMARY KEY);");
    l.close();
    await expect(restoreStore(lookalike, target)).rejects.toThrow(/not a panel-steward store of a known schema: .*the table panel lacks the columns created_at, name, settings_json/);

    const newer = join(folder, 'newer.db');
    await backupStore(db, newer);
    const n = new BetterSqlite3(newer);
    n.prepare('INSERT INTO schema_migrations (name, applied_at) VALUES (?, ?)').run('9999_from_the_future.sql', '2030-01-01T00:00:00Z');
    n.close();
    const known = listMigrations(join(packageRoot(), 'migrations'));
    await expect(restoreStore(newer, target)).rejects.toThrow(
      `newer version of panel-steward (its schema is at 9999_from_the_future.sql; this version knows up to ${known[known.length - 1]})`,
    );
    expect(existsSync(target)).toBe(false);

    // A store from before the latest migration restores and is brought up to date when opened.
    const older = join(folder, 'older.db');
    const earlierMigrations = join(folder, 'earlier-migrations');
    mkdirSync(earlierMigrations);
    for (const name of known.slice(0, -1)) copyFileSync(join(packageRoot(), 'migrations', name), join(earlierMigrations, name));
    const o = new BetterSqlite3(older);
    migrate(o, earlierMigrations);
    o.close();
    await restoreStore(older, target);
    const opened = openStore(target);
    expect((opened.prepare('SELECT count(*) AS n FROM schema_migrations').get() as { n: number }).n).toBe(known.length);
    opened.close();
  });
});
