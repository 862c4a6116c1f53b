import { mkdirSync } from 'node:fs';
import { dirname } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import type { Database } from 'better-sqlite3';
import { defaultMigrationsFolder, migrate } from './migrate.js';
import { quickCheckProblems, StoreDamagedError, type StoreHealth } from './store-health.js';

export type { Database } from 'better-sqlite3';

export interface OpenStoreOptions {
  /** Folder of `NNNN_*.sql` files; defaults to the project's `migrations/`. */
  migrationsFolder?: string;
  /** How long a connection waits for another writer before giving up (ms). */
  busyTimeoutMs?: number;
  readonly?: boolean;
  /**
   * When `PRAGMA quick_check` finds damage: 'throw' (default) a StoreDamagedError, or
   * 'read-only': open without migrating and with SQLite's query_only on, so nothing can be
   * written (the service uses this to keep the readable pages and say what happened).
   */
  ifDamaged?: 'throw' | 'read-only';
}

const healthOfConnection = new WeakMap<Database, StoreHealth>();

/** The health found when the connection was opened by openStore (sound when not recorded). */
export function storeHealthOf(db: Database): StoreHealth {
  return healthOfConnection.get(db) ?? { ok: true, path: db.name, problems: [] };
}

/** Long enough for another process's whole 10⁶-rating import to finish committing. */
const DEFAULT_BUSY_TIMEOUT_MS = 30_000;

/**
 * Opens (creating the folder and file if needed), checks (`PRAGMA quick_check`) and migrates
 * the store. Throws when a migration fails, which stops the start, and when the store is
 * damaged (StoreDamagedError) unless `ifDamaged: 'read-only'`.
 *
 * Pragmas, per connection:
 * - WAL: readers (report pages) never block the importer and vice versa, and a crash at any
 *   moment leaves the last committed state (the write-ahead log is replayed or ignored).
 * - foreign_keys ON: SQLite's default is off; the schema relies on them.
 * - busy_timeout: a second process (CLI import while the service runs) waits instead of
 *   failing with "database is locked".
 * - synchronous=NORMAL: in WAL mode this still never corrupts the store and never exposes
 *   half a transaction; a power cut (not a process crash) may lose the last few commits,
 *   which the user can re-import (the file is still there; the hash check makes it safe).
 *   FULL would fsync on every commit for little gain on a single-user desktop store.
 */
export function openStore(path: string, options: OpenStoreOptions = {}): Database {
  if (path !== ':memory:' && !options.readonly) mkdirSync(dirname(path), { recursive: true });
  const db = new BetterSqlite3(path, { readonly: options.readonly ?? false });
  try {
    db.pragma(`busy_timeout = ${Math.trunc(options.busyTimeoutMs ?? DEFAULT_BUSY_TIMEOUT_MS)}`);
    // Before anything writes (WAL switch, migrations): a damaged file must not be built upon.
    const problems = path === ':memory:' ? [] : quickCheckProblems(db);
    if (problems.length > 0) {
      const health: StoreHealth = { ok: false, path, problems };
      if (options.ifDamaged !== 'read-only') throw new StoreDamagedError(health);
      db.pragma('query_only = ON');
      healthOfConnection.set(db, health);
      return db;
    }
    healthOfConnection.set(db, { ok: true, path, problems: [] });
    if (!options.readonly) db.pragma('journal_mode = WAL');
    db.pragma('synchronous = NORMAL');
    db.pragma('foreign_keys = ON');
    if (!options.readonly) migrate(db, options.migrationsFolder ?? defaultMigrationsFolder());
  } catch (error) {
    db.close();
    throw error;
  }
  return db;
}
