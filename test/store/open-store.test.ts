import { mkdirSync, writeFileSync, existsSync } from 'node:fs';
import { join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import { afterEach, describe, expect, it } from 'vitest';
import { listMigrations, MigrationError } from '../../store/migrate.js';
import { openStore } from '../../store/open-store.js';
import { packageRoot } from '../../store/package-root.js';
import { tempFolder } from './helpers.js';

const cleanups: (() => void)[] = [];
afterEach(() => cleanups.splice(0).forEach((f) => f()));
function folder(): string {
  const t = tempFolder('open');
  cleanups.push(t.remove);
  return t.folder;
}

describe('openStore', () => {
  it('creates the folder, sets the pragmas and records every migration on an empty store', () => {
    const path = join(folder(), 'nested', 'deeper', 'store.db');
    const db = openStore(path);
    try {
      expect(existsSync(path)).toBe(true);
      expect(db.pragma('journal_mode', { simple: true })).toBe('wal');
      expect(db.pragma('foreign_keys', { simple: true })).toBe(1);
      expect(db.pragma('synchronous', { simple: true })).toBe(1); // NORMAL
      expect(Number(db.pragma('busy_timeout', { simple: true }))).toBeGreaterThan(0);
      const recorded = (db.prepare('SELECT name FROM schema_migrations ORDER BY name').all() as { name: string }[]).map((r) => r.name);
      expect(recorded).toEqual(listMigrations(join(packageRoot(), 'migrations')));
      expect(recorded[0]).toBe('0001_store.sql');
      const tables = (db.prepare("SELECT name FROM sqlite_master WHERE type = 'table'").all() as { name: string }[]).map((r) => r.name);
      for (const table of ['panel', 'attribute', 'assessor', 'product', 'session', 'rating', 'import', 'rating_correction', 'quarantine']) {
        expect(tables).toContain(table);
      }
    } finally {
      db.close();
    }
    // Opening again applies nothing new.
    const again = openStore(path);
    expect((again.prepare('SELECT count(*) AS n FROM schema_migrations').get() as { n: number }).n).toBe(listMigrations(join(packageRoot(), 'migrations')).length);
    again.close();
  });

  it('stops at a failing migration, keeps the earlier ones and leaves nothing of the failed one', () => {
    const dir = folder();
    const migrations = join(dir, 'migrations');
    mkdirSync(migrations);
    writeFileSync(join(migrations, '0001_first.sql'), 'CREATE TABLE first_table (id INTEGER PRIMARY KEY);');
    writeFileSync(join(migrations, '0002_broken.sql'), 'CREATE TABLE half_done (id INTEGER); INSERT INTO no_such_table VALUES (1);');
    writeFileSync(join(migrations, '0003_later.sql'), 'CREATE TABLE later_table (id INTEGER);');
    writeFileSync(join(migrations, 'README.md'), 'not a migration');
    const path = join(dir, 'store.db');
    expect(() => openStore(path, { migrationsFolder: migrations })).toThrow(MigrationError);
    expect(() => openStore(path, { migrationsFolder: migrations })).toThrow(/0002_broken\.sql/);
    const raw = new BetterSqlite3(path);
    const tables = (raw.prepare("SELECT name FROM sqlite_master WHERE type = 'table'").all() as { name: string }[]).map((r) => r.name);
    expect(tables).toContain('first_table');
    expect(tables).not.toContain('half_done');
    expect(tables).not.toContain('later_table');
    expect(raw.prepare('SELECT name FROM schema_migrations').all()).toEqual([{ name: '0001_first.sql' }]);
    raw.close();
  });
});
