import { existsSync, mkdirSync, renameSync, rmSync, statSync } from 'node:fs';
import { basename, dirname, join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import type { Database } from 'better-sqlite3';

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

function describeCopy(path: string): { nPanels: number; nRatings: number; problems: string[] } {
  let copy: Database;
  try {
    copy = new BetterSqlite3(path, { readonly: true, fileMustExist: true });
  } catch {
    return { nPanels: 0, nRatings: 0, problems: ['the file cannot be opened as a store'] };
  }
  try {
    const problems = integrityCheck(copy).filter((line) => line !== 'ok');
    const hasSchema = copy.prepare("SELECT count(*) AS n FROM sqlite_master WHERE type = 'table' AND name IN ('schema_migrations', 'panel', 'rating')").get() as { n: number };
    if (hasSchema.n !== 3) return { nPanels: 0, nRatings: 0, problems: [...problems, 'the file is not a panel-steward store'] };
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
  if (existsSync(dbPath)) {
    const target = new BetterSqlite3(dbPath, { fileMustExist: true });
    try {
      target.pragma('busy_timeout = 30000');
      const hasPanels = target.prepare("SELECT count(*) AS n FROM sqlite_master WHERE type = 'table' AND name = 'panel'").get() as { n: number };
      const nPanels = hasPanels.n ? (target.prepare('SELECT count(*) AS n FROM panel').get() as { n: number }).n : 0;
      if (nPanels > 0 && !options.force) {
        throw new BackupError(`The store ${basename(dbPath)} already holds ${nPanels} panel${nPanels === 1 ? '' : 's'}; add --force to replace it (it is saved beside itself first).`);
      }
      if (nPanels > 0) {
        const stamp = (options.now ?? (() => new Date()))().toISOString().replace(/[:.]/g, '-');
        previousSavedAs = `${dbPath}.before-restore-${stamp}`;
        await target.backup(previousSavedAs);
      }
    } finally {
      target.close();
    }
  } else {
    mkdirSync(dirname(dbPath), { recursive: true });
  }
  // The backup API copies every page of the source into the destination under its locks.
  const source = new BetterSqlite3(fromPath, { readonly: true, fileMustExist: true });
  try {
    await source.backup(dbPath);
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
