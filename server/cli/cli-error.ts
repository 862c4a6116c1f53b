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

/** Store location: --db, else PANEL_STEWARD_DB, else ./data/panel-steward.db. */
export function resolveDbPath(dbOption: string | undefined): string {
  return dbOption ?? process.env.PANEL_STEWARD_DB ?? 'data/panel-steward.db';
}

/** Unexpected fit errors on stderr, with where they happened and the stack (for a bug report). */
export const stderrFitLogger: FitFailureLogger = {
  error(details, message) {
    const { stack, ...where } = details;
    const place = Object.entries(where).map(([key, value]) => `${key} ${String(value)}`).join(', ');
    process.stderr.write(`error: ${message} (${place})\n${typeof stack === 'string' ? `${stack}\n` : ''}`);
  },
};
