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
