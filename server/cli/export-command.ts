/** `panel-steward export --panel NAME [--db PATH] --format csv|json [--out FILE]` */
import { createWriteStream, openSync, renameSync, rmSync } from 'node:fs';
import { once } from 'node:events';
import { basename, dirname, join } from 'node:path';
import type { Writable } from 'node:stream';
import type { Command } from 'commander';
import { exportRatings, PanelNotFoundError, type ExportFormat, type ExportResult } from '../../store/export-ratings.js';
import { CliError } from './cli-error.js';
import { openStoreForCli } from './open-store-for-cli.js';
import { COMMAND_SUMMARIES } from './command-summaries.js';

export interface ExportCommandOptions {
  panel: string;
  db?: string;
  format?: string;
  out?: string;
}

export async function runExportCommand(options: ExportCommandOptions, stdout: Writable = process.stdout): Promise<ExportResult> {
  const format = (options.format ?? 'csv').toLowerCase();
  if (format !== 'csv' && format !== 'json') throw new CliError(`--format must be csv or json (got "${options.format}").`, 2);
  const db = openStoreForCli(options.db);
  try {
    if (!options.out) return await exportOrExplain(db, options.panel, format, stdout);
    // Write beside the target and rename at the end: an interrupted export never leaves a
    // truncated file under the requested name.
    const partial = join(dirname(options.out), `.${basename(options.out)}.partial`);
    // Opened here, so a missing folder or a full disk is an error of this command (with its
    // message), not an unhandled error event of the stream.
    const file = createWriteStream('', { fd: openSync(partial, 'w') });
    try {
      const result = await exportOrExplain(db, options.panel, format, file);
      file.end();
      await once(file, 'finish');
      renameSync(partial, options.out);
      return result;
    } catch (error) {
      file.destroy();
      rmSync(partial, { force: true });
      throw error;
    }
  } finally {
    db.close();
  }
}

async function exportOrExplain(db: Parameters<typeof exportRatings>[0], panel: string, format: ExportFormat, out: Writable): Promise<ExportResult> {
  try {
    return await exportRatings(db, { panel, format }, out);
  } catch (error) {
    if (error instanceof PanelNotFoundError) {
      const names = (db.prepare('SELECT name FROM panel ORDER BY name').all() as { name: string }[]).map((row) => `"${row.name}"`);
      throw new CliError(`${error.message} ${names.length > 0 ? `Panels in it: ${names.join(', ')}.` : 'It holds no panels yet.'}`);
    }
    throw error;
  }
}

export function registerExportCommand(program: Command): void {
  program
    .command('export')
    .description(COMMAND_SUMMARIES.export.description)
    .requiredOption('--panel <name>', 'panel to export')
    .option('--db <path>', 'store file (default: PANEL_STEWARD_DB or data/panel-steward.db)')
    .option('--format <csv|json>', 'output format', 'csv')
    .option('--out <file>', 'write to this file instead of standard output')
    .action(async (options: ExportCommandOptions) => {
      const result = await runExportCommand(options);
      if (options.out) process.stderr.write(`Wrote ${result.nRatings.toLocaleString('en-US')} ratings of panel "${result.panel}" to ${basename(options.out)}.\n`);
    });
}
