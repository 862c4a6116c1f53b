import { copyFileSync, existsSync, mkdirSync, readFileSync, renameSync, rmSync, statSync } from 'node:fs';
import { basename, dirname, join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import type { Database } from 'better-sqlite3';
import { defaultMigrationsFolder, listMigrations } from './migrate.js';
import { integrityCheckProblems, quickCheckProblems, restoreAdvice } from './store-health.js';

export class BackupError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'BackupError';
  }
}

export interface BackupResult {
  outPath: string;
  totalPages: number;
  /** Counts in the copy, for the message. */
  nPanels: number;
  nRatings: number;
}

/** `PRAGMA integrity_check` of a connection: ['ok'] when the file is sound. */
export function integrityCheck(db: Database): string[] {
  return (db.pragma('integrity_check') as { integrity_check: string }[]).map((row) => row.integrity_check);
}

const columnsOf = (db: Database, table: string): string[] =>
  (db.prepare('SELECT name FROM pragma_table_info(?) ORDER BY name').all(table) as { name: string }[]).map((row) => row.name);

/**
 * Whether a sound SQLite file is a panel-steward store this version can open: the migrations
 * record is there, every migration it names is one this version has, and every table those
 * migrations create is there with its columns (built for comparison in memory from this
 * version's own files). An older store passes (it is migrated when opened); a newer one is
 * refused with both versions named.
 */
export function schemaProblems(db: Database, migrationsFolder = defaultMigrationsFolder()): string[] {
  const hasRecord = db.prepare("SELECT count(*) AS n FROM sqlite_master WHERE type = 'table' AND name = 'schema_migrations'").get() as { n: number };
  if (hasRecord.n === 0) return ['the file is an SQLite database but not a panel-steward store (it has no migrations record)'];
  const recorded = (db.prepare('SELECT name FROM schema_migrations ORDER BY name').all() as { name: string }[]).map((row) => row.name);
  const known = listMigrations(migrationsFolder);
  if (recorded.length === 0 || recorded[0] !== known[0]) return ['the file is an SQLite database but not a panel-steward store (its migrations record does not start with the first store migration)'];
  const unknown = recorded.filter((name) => !known.includes(name));
  if (unknown.length > 0) {
    return [
      `the store was written by a newer version of panel-steward (its schema is at ${recorded[recorded.length - 1]}; this version knows up to ${known[known.length - 1]}); update panel-steward and restore again`,
    ];
  }
  const reference = new BetterSqlite3(':memory:');
  try {
    // This version's schema as far as the file got: the same migration files, applied to nothing.
    for (const name of known) if (recorded.includes(name)) reference.exec(readFileSync(join(migrationsFolder, name), 'utf8'));
    const tables = (reference.prepare("SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%' ORDER BY name").all() as { name: string }[]).map((row) => row.name);
    const problems: string[] = [];
    for (const table of tables) {
      const expected = columnsOf(reference, table);
      const found = columnsOf(db, table);
      if (found.length === 0) problems.push(`the table ${table} is missing`);
      else {
        const missing = expected.filter((column) => !found.includes(column));
        if (missing.length > 0) problems.push(`the table ${table} lacks the column${missing.length === 1 ? '' : 's'} ${missing.join(', ')}`);
      }
    }
    return problems.length > 0 ? [`the file is not a panel-steward store of a known schema: ${problems.slice(0, 5).join('; ')}`] : [];
  } finally {
    reference.close();
  }
}

function describeCopy(path: string): { nPanels: number; nRatings: number; problems: string[] } {
  let copy: Database;
  try {
    copy = new BetterSqlite3(path, { readonly: true, fileMustExist: true });
  } catch {
    return { nPanels: 0, nRatings: 0, problems: ['the file cannot be opened as a store'] };
  }
  try {
    const problems = integrityCheck(copy).filter((line) => line !== 'ok');
    if (problems.length > 0) return { nPanels: 0, nRatings: 0, problems };
    const schema = schemaProblems(copy);
    if (schema.length > 0) return { nPanels: 0, nRatings: 0, problems: schema };
    const nPanels = (copy.prepare('SELECT count(*) AS n FROM panel').get() as { n: number }).n;
    const nRatings = (copy.prepare('SELECT count(*) AS n FROM rating').get() as { n: number }).n;
    return { nPanels, nRatings, problems };
  } catch {
    return { nPanels: 0, nRatings: 0, problems: ['the file is not a readable store'] };
  } finally {
    copy.close();
  }
}

/**
 * Copies the store to `outPath` with SQLite's online backup (page by page, while the service
 * keeps reading and writing: the copy is one consistent committed state), then checks the copy
 * with `integrity_check`. Writes to a temporary name first so a failed backup never leaves a
 * half-written file under the requested name. Refuses to overwrite an existing file.
 */
export interface BackupOptions {
  /** Pages copied per step; between steps the event loop (and other connections) run. */
  pagesPerStep?: number;
  /** Called after every step (tests use it to write from another connection mid-copy). */
  onStep?: (progress: { totalPages: number; remainingPages: number }) => void;
}

export async function backupStore(db: Database, outPath: string, options: BackupOptions = {}): Promise<BackupResult> {
  if (existsSync(outPath)) throw new BackupError(`The backup file ${basename(outPath)} already exists; choose another name.`);
  mkdirSync(dirname(outPath), { recursive: true });
  const partial = join(dirname(outPath), `.${basename(outPath)}.partial`);
  rmSync(partial, { force: true });
  let totalPages: number;
  try {
    const pagesPerStep = options.pagesPerStep ?? 100;
    ({ totalPages } = await db.backup(partial, {
      progress: (progress) => {
        options.onStep?.(progress);
        return pagesPerStep;
      },
    }));
  } catch (error) {
    rmSync(partial, { force: true });
    throw new BackupError(`The backup could not be written: ${error instanceof Error ? error.message : String(error)}.`);
  }
  // A backup is one self-contained file: leave WAL mode in the copy (no -wal/-shm beside it).
  try {
    const handle = new BetterSqlite3(partial, { fileMustExist: true });
    handle.pragma('journal_mode = DELETE');
    handle.close();
  } catch {
    // the integrity check below reports an unusable copy
  }
  const copy = describeCopy(partial);
  if (copy.problems.length > 0) {
    rmSync(partial, { force: true });
    // Say which file is damaged: a sound source with a bad copy points at the disk written to.
    const sourceProblems = integrityCheckProblems(db, 5);
    if (sourceProblems.length > 0) {
      throw new BackupError(`No backup was written: the source store ${db.name} is damaged (${sourceProblems.join('; ')}). ${restoreAdvice(db.name)}`);
    }
    throw new BackupError(`The backup failed its integrity check: ${copy.problems.slice(0, 5).join('; ')}.`);
  }
  renameSync(partial, outPath);
  return { outPath, totalPages, nPanels: copy.nPanels, nRatings: copy.nRatings };
}

export interface RestoreResult {
  dbPath: string;
  nPanels: number;
  nRatings: number;
  /** Where the replaced store was kept, when there was one. */
  previousSavedAs: string | null;
}

/**
 * Replaces the store at `dbPath` with the backup at `fromPath`.
 *
 * Decisions: the backup is checked first (integrity_check and the store's tables) and nothing
 * is touched when it fails. A store that already holds panels is only replaced with `force`,
 * and then it is first saved beside itself (`NAME.before-restore-TIMESTAMP`) so a restore can
 * be undone. The copy itself uses SQLite's backup API into the live file under SQLite's own
 * locks, so a service that has the store open sees either the old or the restored store,
 * never a mix; it waits (busy timeout) while an import is committing.
 */
export async function restoreStore(fromPath: string, dbPath: string, options: { force?: boolean; now?: () => Date } = {}): Promise<RestoreResult> {
  if (!existsSync(fromPath) || !statSync(fromPath).isFile()) throw new BackupError(`The backup file ${basename(fromPath)} does not exist.`);
  const copy = describeCopy(fromPath);
  if (copy.problems.length > 0) throw new BackupError(`${basename(fromPath)} cannot be restored: ${copy.problems.slice(0, 5).join('; ')}.`);

  let previousSavedAs: string | null = null;
  let targetDamaged = false;
  if (existsSync(dbPath)) {
    const target = new BetterSqlite3(dbPath, { fileMustExist: true });
    try {
      target.pragma('busy_timeout = 30000');
      const stamp = (options.now ?? (() => new Date()))().toISOString().replace(/[:.]/g, '-');
      // A damaged store is what restore is for: no --force needed, and it is kept, bytes as found.
      targetDamaged = quickCheckProblems(target, 1).length > 0;
      if (targetDamaged) {
        previousSavedAs = `${dbPath}.damaged-${stamp}`;
        target.close();
        copyFileSync(dbPath, previousSavedAs);
        for (const suffix of ['-wal', '-shm']) if (existsSync(dbPath + suffix)) copyFileSync(dbPath + suffix, previousSavedAs + suffix);
      } else {
        const hasPanels = target.prepare("SELECT count(*) AS n FROM sqlite_master WHERE type = 'table' AND name = 'panel'").get() as { n: number };
        const nPanels = hasPanels.n ? (target.prepare('SELECT count(*) AS n FROM panel').get() as { n: number }).n : 0;
        if (nPanels > 0 && !options.force) {
          throw new BackupError(`The store ${basename(dbPath)} already holds ${nPanels} panel${nPanels === 1 ? '' : 's'}; add --force to replace it (it is saved beside itself first).`);
        }
        if (nPanels > 0) {
          previousSavedAs = `${dbPath}.before-restore-${stamp}`;
          await target.backup(previousSavedAs);
        }
      }
    } finally {
      if (target.open) target.close();
    }
  } else {
    mkdirSync(dirname(dbPath), { recursive: true });
  }
  // The backup API copies every page of the source into the destination under its locks.
  const source = new BetterSqlite3(fromPath, { readonly: true, fileMustExist: true });
  try {
    try {
      await source.backup(dbPath);
    } catch (error) {
      // A damaged destination header can stop the copy into it; it was saved above, so start afresh.
      if (!targetDamaged) throw error;
      for (const suffix of ['', '-wal', '-shm']) rmSync(dbPath + suffix, { force: true });
      await source.backup(dbPath);
    }
  } finally {
    source.close();
  }
  const restored = new BetterSqlite3(dbPath, { fileMustExist: true });
  try {
    const problems = integrityCheck(restored).filter((line) => line !== 'ok');
    if (problems.length > 0) throw new BackupError(`The restored store failed its integrity check: ${problems.slice(0, 5).join('; ')}.`);
    restored.pragma('journal_mode = WAL');
  } finally {
    restored.close();
  }
  return { dbPath, nPanels: copy.nPanels, nRatings: copy.nRatings, previousSavedAs };
}
