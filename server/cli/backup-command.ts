/**
 * `panel-steward backup --db PATH --out FILE` (online: works while the service runs) and
 * `panel-steward restore --from FILE --db PATH [--force]`.
 */
import { basename } from 'node:path';
import type { Command } from 'commander';
import { BackupError, backupStore, restoreStore, type BackupResult, type RestoreResult } from '../../store/backup.js';
import { openStore, type Database } from '../../store/open-store.js';
import { restoreAdvice, StoreDamagedError } from '../../store/store-health.js';
import { CliError, resolveDbPath } from './cli-error.js';
import { openStoreForCli } from './open-store-for-cli.js';
import { COMMAND_SUMMARIES } from './command-summaries.js';

/** The source is checked when it opens: a backup of a damaged store would carry the damage on. */
function openBackupSource(dbOption: string | undefined): Database {
  const dbPath = resolveDbPath(dbOption);
  try {
    return openStore(dbPath, { ifDamaged: 'throw' });
  } catch (error) {
    if (error instanceof StoreDamagedError) {
      const problems = error.health.problems;
      throw new CliError(
        `No backup was written: the source store ${dbPath} is damaged (SQLite's check found: ${problems[0]}${problems.length > 1 ? ` and ${problems.length - 1} more` : ''}). ` +
          `A copy would carry the damage on. ${restoreAdvice(dbPath)}`,
      );
    }
    return openStoreForCli(dbOption);
  }
}

export async function runBackupCommand(options: { db?: string; out: string }): Promise<BackupResult> {
  const db = openBackupSource(options.db);
  try {
    return await backupStore(db, options.out);
  } catch (error) {
    if (error instanceof BackupError) throw new CliError(error.message);
    throw error;
  } finally {
    db.close();
  }
}

export async function runRestoreCommand(options: { from: string; db?: string; force?: boolean }): Promise<RestoreResult> {
  try {
    return await restoreStore(options.from, resolveDbPath(options.db), { force: options.force ?? false });
  } catch (error) {
    if (error instanceof BackupError) throw new CliError(error.message);
    throw error;
  }
}

export function registerBackupCommands(program: Command): void {
  program
    .command('backup')
    .description(COMMAND_SUMMARIES.backup.description)
    .option('--db <path>', 'store file (default: PANEL_STEWARD_DB or data/panel-steward.db)')
    .requiredOption('--out <file>', 'backup file to write (must not exist)')
    .action(async (options: { db?: string; out: string }) => {
      const result = await runBackupCommand(options);
      process.stdout.write(`Backed up ${result.nPanels} panel(s) and ${result.nRatings.toLocaleString('en-US')} ratings to ${basename(result.outPath)}; integrity check passed.\n`);
    });
  program
    .command('restore')
    .description(COMMAND_SUMMARIES.restore.description)
    .requiredOption('--from <file>', 'backup file')
    .option('--db <path>', 'store file (default: PANEL_STEWARD_DB or data/panel-steward.db)')
    .option('--force', 'replace a store that holds panels (it is saved beside itself first)')
    .action(async (options: { from: string; db?: string; force?: boolean }) => {
      const result = await runRestoreCommand(options);
      const saved = result.previousSavedAs ? ` The replaced store was saved as ${basename(result.previousSavedAs)}.` : '';
      process.stdout.write(`Restored ${result.nPanels} panel(s) and ${result.nRatings.toLocaleString('en-US')} ratings from ${basename(options.from)}.${saved}\n`);
    });
}
