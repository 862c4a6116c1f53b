/**
 * Name, operand and one-line description of every command: the one source for both the command
 * modules and the top-level help, which lists the commands without loading their modules (they
 * bring the store, the service and the worker pool, most of a second of start-up together).
 */
import type { Command } from 'commander';

export interface CommandSummary {
  /** Operand in commander's notation, e.g. `<file>`; none when the command takes only options. */
  operand?: { name: string; description: string };
  description: string;
}

const RATINGS_FILE = { name: '<file>', description: 'the ratings file' };

export const COMMAND_SUMMARIES = {
  analyze: {
    operand: RATINGS_FILE,
    description: 'Fit the panel models to a ratings file (CSV long or wide form, or .xlsx) and print the results; no store needed.',
  },
  serve: { description: 'Serve the web pages and the JSON API (127.0.0.1:8080 unless told otherwise).' },
  import: { operand: RATINGS_FILE, description: 'Import a ratings file (CSV long or wide form, or .xlsx) into a panel.' },
  export: { description: "Write a panel's stored ratings in long form (CSV or JSON)." },
  backup: { description: 'Copy the store to a file (SQLite online backup; safe while the service runs).' },
  restore: { description: 'Replace the store with a backup (checked first; a store holding panels needs --force).' },
  refit: { description: "Recompute a panel's session fits, indices, period fits and flags from the stored ratings." },
  flags: { description: "Print a panel's current flags (evidence for review, not verdicts)." },
  check: { description: "Check a store or backup file with SQLite's integrity check (exit 0 when sound, 1 when damaged)." },
  report: {
    description: 'Write a session report or a report over a range of sessions as one self-contained HTML file (to print or e-mail).',
  },
} satisfies Record<string, CommandSummary>;

/**
 * Lists a command in the top-level help as its module would: name, `[options]` (every command
 * has options; a hidden one stands in for them), operand and description.
 */
export function registerCommandSummaries(target: Command): void {
  for (const [name, summary] of Object.entries(COMMAND_SUMMARIES)) {
    const command = target.command(name).description(summary.description);
    // createOption, not `new Option`: this module is also loaded beside the bundle by the command
    // modules, where a value import would load a second copy of commander (~15 ms).
    command.addOption(command.createOption('--options-of-the-module').hideHelp());
    if ('operand' in summary) command.argument(summary.operand.name, summary.operand.description);
  }
}
