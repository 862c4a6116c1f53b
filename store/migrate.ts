import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { Database } from 'better-sqlite3';
import { packageRoot } from './package-root.js';

/** Migration files are `NNNN_words.sql`; anything else in the folder is ignored. */
const MIGRATION_FILE = /^(\d{4})_[a-z0-9_-]+\.sql$/i;

export interface AppliedMigration {
  name: string;
  appliedAt: string;
}

export class MigrationError extends Error {
  constructor(
    readonly migration: string,
    cause: unknown,
  ) {
    super(`Store migration ${migration} failed: ${cause instanceof Error ? cause.message : String(cause)}`);
    this.name = 'MigrationError';
  }
}

/** The default migrations folder: `migrations/` in the project folder. */
export function defaultMigrationsFolder(): string {
  return join(packageRoot(), 'migrations');
}

/** Migration file names in the folder, in application order. */
export function listMigrations(folder: string): string[] {
  return readdirSync(folder)
    .filter((name) => MIGRATION_FILE.test(name))
    .sort();
}

/**
 * Applies every migration not yet recorded in `schema_migrations`, in name order, each inside
 * its own transaction together with its record, so a failing file leaves nothing behind and
 * stops the start (the error is thrown; later files are not tried).
 */
export function migrate(db: Database, folder = defaultMigrationsFolder(), now: () => Date = () => new Date()): AppliedMigration[] {
  db.exec(`CREATE TABLE IF NOT EXISTS schema_migrations (
    name       TEXT PRIMARY KEY,
    applied_at TEXT NOT NULL
  )`);
  const applied = new Set(
    (db.prepare('SELECT name FROM schema_migrations').all() as { name: string }[]).map((row) => row.name),
  );
  const record = db.prepare('INSERT INTO schema_migrations (name, applied_at) VALUES (?, ?)');
  const done: AppliedMigration[] = [];
  for (const name of listMigrations(folder)) {
    if (applied.has(name)) continue;
    const sql = readFileSync(join(folder, name), 'utf8');
    const appliedAt = now().toISOString();
    try {
      db.transaction(() => {
        db.exec(sql);
        record.run(name, appliedAt);
      }).immediate();
    } catch (error) {
      throw new MigrationError(name, error);
    }
    done.push({ name, appliedAt });
  }
  return done;
}
