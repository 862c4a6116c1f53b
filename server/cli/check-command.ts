/**
 * `panel-steward check --db PATH [--format text|json]`: SQLite's full `integrity_check` of a
 * store or a backup file. Exit 0 when sound, 1 when damaged, 2 when there is no such file.
 * The file is only read (no migration, no WAL switch), so a backup can be checked before a restore.
 */
import { existsSync, statSync } from 'node:fs';
import BetterSqlite3 from 'better-sqlite3';
import type { Command } from 'commander';
import { COMMAND_SUMMARIES } from './command-summaries.js';
import { integrityCheckProblems } from '../../store/store-health.js';
import { CliError, resolveDbPath } from './cli-error.js';

export interface CheckResult {
  ok: boolean;
  path: string;
  check: 'integrity_check';
  /** SQLite's lines for each problem; empty when ok. */
  problems: string[];
  durationMs: number;
}

export function runCheckCommand(options: { db?: string }): CheckResult {
  const path = resolveDbPath(options.db);
  if (!existsSync(path) || !statSync(path).isFile()) throw new CliError(`panel-steward check: there is no file ${path}.`, 2);
  const started = performance.now();
  let problems: string[];
  let db: InstanceType<typeof BetterSqlite3> | null = null;
  try {
    // Read-write open with query_only: a read-only open of a WAL store fails without its -shm file.
    db = new BetterSqlite3(path, { fileMustExist: true });
    db.pragma('query_only = ON');
    db.pragma('busy_timeout = 30000');
    problems = integrityCheckProblems(db);
  } catch (error) {
    problems = [`the file cannot be read as an SQLite database (${error instanceof Error ? error.message : String(error)})`];
  } finally {
    db?.close();
  }
  return { ok: problems.length === 0, path, check: 'integrity_check', problems, durationMs: Math.round(performance.now() - started) };
}

export function registerCheckCommand(program: Command): void {
  program
    .command('check')
    .description(COMMAND_SUMMARIES.check.description)
    .option('--db <path>', 'store or backup file (default: PANEL_STEWARD_DB or data/panel-steward.db)')
    .option('--format <format>', 'text or json', 'text')
    .action((options: { db?: string; format: string }) => {
      if (options.format !== 'json' && options.format !== 'text') {
        throw new CliError(`panel-steward check: --format must be json or text, not "${options.format}".`, 2);
      }
      const result = runCheckCommand(options);
      if (options.format === 'json') process.stdout.write(`${JSON.stringify(result, null, 2)}\n`);
      else if (result.ok) process.stdout.write(`ok: ${result.path} passed SQLite's integrity check (${result.durationMs} ms).\n`);
      else {
        const lines = result.problems.map((line) => `  ${line}`);
        process.stdout.write(
          `${result.path} is damaged: SQLite's integrity check found ${result.problems.length} problem${result.problems.length === 1 ? '' : 's'}:\n${lines.join('\n')}\n` +
            `Restore a sound backup with: panel-steward restore --from BACKUP-FILE --db ${result.path}\n`,
        );
      }
      process.exitCode = result.ok ? 0 : 1;
    });
}
