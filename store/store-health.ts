import type { Database } from 'better-sqlite3';

/**
 * Whether the store file is sound. A damaged store (bytes overwritten, a disk fault) is never
 * written to: every write on it would build on pages SQLite cannot trust, and the damage would
 * spread into the next backup. Callers open it read-only at most and point to the way out.
 */
export interface StoreHealth {
  ok: boolean;
  /** The store file as given (`:memory:` for a memory store). */
  path: string;
  /** Lines of SQLite's check ("*** in database main *** Tree 7 page 30: …"); empty when ok. */
  problems: string[];
}

/** SQLite result codes that mean the file itself is not sound. */
export function isCorruptionError(error: unknown): boolean {
  const code = (error as { code?: unknown } | null)?.code;
  return typeof code === 'string' && (code.startsWith('SQLITE_CORRUPT') || code === 'SQLITE_NOTADB');
}

function checkLines(db: Database, pragma: 'quick_check' | 'integrity_check', maxErrors: number): string[] {
  try {
    const rows = db.pragma(`${pragma}(${Math.max(1, Math.trunc(maxErrors))})`) as Record<string, string>[];
    // One row per problem, or (newer SQLite) one row holding them all on separate lines.
    const lines = rows
      .flatMap((row) => String(Object.values(row)[0]).split('\n'))
      .filter((line) => line !== '' && line !== '*** in database main ***');
    return lines.length === 1 && lines[0] === 'ok' ? [] : lines;
  } catch (error) {
    if (isCorruptionError(error)) return [error instanceof Error ? error.message : String(error)];
    throw error;
  }
}

/**
 * `PRAGMA quick_check`: every b-tree page's structure and the freelist, without comparing
 * indexes against their tables, so it reads each page once (a year-size store: see
 * bench/README.md). Returns the problems, empty when the store is sound.
 */
export function quickCheckProblems(db: Database, maxErrors = 20): string[] {
  return checkLines(db, 'quick_check', maxErrors);
}

/** `PRAGMA integrity_check`: quick_check plus index-against-table consistency and constraints. */
export function integrityCheckProblems(db: Database, maxErrors = 100): string[] {
  return checkLines(db, 'integrity_check', maxErrors);
}

/** The way out of a damaged store, for messages on the terminal and on pages. */
export function restoreAdvice(storeName: string): string {
  return `Restore it from a backup: panel-steward restore --from BACKUP-FILE --db ${storeName} (the damaged file is kept beside it; panel-steward check --db FILE checks a backup first).`;
}

/** The sentence every refused write and failed start shows; `storeName` is a path or a file name. */
export function damagedStoreMessage(storeName: string, problems: readonly string[]): string {
  const first = problems[0] ?? 'the check failed';
  const more = problems.length > 1 ? ` and ${problems.length - 1} more problem${problems.length === 2 ? '' : 's'}` : '';
  return `The store ${storeName} is damaged (SQLite's check found: ${first}${more}). Nothing can be written to it. ${restoreAdvice(storeName)}`;
}

/** Thrown when a command that writes opens a damaged store. */
export class StoreDamagedError extends Error {
  constructor(readonly health: StoreHealth) {
    super(damagedStoreMessage(health.path, health.problems));
    this.name = 'StoreDamagedError';
  }
}
