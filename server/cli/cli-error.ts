import { describeStorageError } from '../storage-errors.js';
import type { FitFailureLogger } from '../refit.js';

/** An error meant for the person at the terminal: printed as-is, no stack trace. */
export class CliError extends Error {
  constructor(
    message: string,
    readonly exitCode = 1,
  ) {
    super(message);
    this.name = 'CliError';
  }
}

/**
 * The store a command line names (`--db PATH` or `--db=PATH`, else PANEL_STEWARD_DB, else the
 * default), for messages about errors that reach the top level.
 */
export function storePathFromArgs(args: readonly string[]): string {
  for (let i = 0; i < args.length; i++) {
    if (args[i] === '--db' && i + 1 < args.length) return resolveDbPath(args[i + 1]);
    if (args[i].startsWith('--db=')) return resolveDbPath(args[i].slice('--db='.length));
  }
  return resolveDbPath(undefined);
}

/** Store location: --db, else PANEL_STEWARD_DB, else ./data/panel-steward.db. */
export function resolveDbPath(dbOption: string | undefined): string {
  return dbOption ?? process.env.PANEL_STEWARD_DB ?? 'data/panel-steward.db';
}

/**
 * The line printed for an error no command turned into a CliError: for a full disk, a read-only
 * store or a missing folder the same sentences the web service gives; otherwise the error's own text.
 */
export function unexpectedErrorMessage(error: unknown, args: readonly string[]): string {
  const storage = describeStorageError(error, { storePath: storePathFromArgs(args) });
  return storage?.message ?? (error instanceof Error ? error.message : String(error));
}
/** Unexpected fit errors on stderr, with where they happened and the stack (for a bug report). */
export const stderrFitLogger: FitFailureLogger = {
  error(details, message) {
    const { stack, ...where } = details;
    const place = Object.entries(where).map(([key, value]) => `${key} ${String(value)}`).join(', ');
    process.stderr.write(`error: ${message} (${place})\n${typeof stack === 'string' ? `${stack}\n` : ''}`);
  },
};
