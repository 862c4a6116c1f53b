/**
 * `panel-steward import FILE --panel NAME [--db PATH] [--scale MIN:MAX] [--quarantine]
 *   [--sheet NAME] [--settings FILE] [--reference CODE]…`
 */
import { existsSync, statSync } from 'node:fs';
import { basename } from 'node:path';
import type { Command } from 'commander';
import { MAX_LISTED_PROBLEMS, type InputFinding, type InputProblem } from '../../domain/problems.js';
import type { ScaleRange } from '../../domain/ratings.js';
import { importRatings, fileInput, type ImportReport } from '../../store/import-ratings.js';
import { checkName } from '../../ingest/names.js';
import { PanelConfigError, readPanelConfigFile, withReferenceProducts, type PanelConfigFile } from '../../store/panel-config.js';
import { CliError } from './cli-error.js';
import { openStoreForCli } from './open-store-for-cli.js';
// Kept importable from here for the commands that used to find it in this module.
export { openStoreForCli };
import { COMMAND_SUMMARIES } from './command-summaries.js';

export interface ImportCommandOptions {
  panel: string;
  db?: string;
  scale?: string;
  quarantine?: boolean;
  sheet?: string;
  settings?: string;
  reference?: string[];
}

export interface CommandOutput {
  stdout: { write(text: string): unknown };
  stderr: { write(text: string): unknown };
}

/** `MIN:MAX` (decimal dots, either may be negative) → a scale; a CliError says how to write it. */
export function parseScaleOption(text: string): ScaleRange {
  const match = /^\s*([+-]?\d+(?:\.\d+)?)\s*:\s*([+-]?\d+(?:\.\d+)?)\s*$/.exec(text);
  const min = match ? Number(match[1]) : NaN;
  const max = match ? Number(match[2]) : NaN;
  if (!match || !(min < max)) {
    throw new CliError(`--scale must be MIN:MAX with MIN below MAX, for example --scale 0:10 (got "${text}").`, 2);
  }
  return { min, max };
}

/** One problem as a line: `file:row:column: message` (row and column left out when not known). */
export function formatProblemLine(problem: InputProblem | InputFinding): string {
  const place = [problem.file, problem.row ?? '', problem.column ?? ''].join(':').replace(/:+$/, '');
  return `${place}: ${problem.message}`;
}

/** The lines a person sees for a rejected import: each listed problem, then "… and N more". */
export function problemLines(report: ImportReport): string[] {
  const lines = report.errors.map(formatProblemLine);
  const more = report.totalErrors - report.errors.length;
  if (more > 0) lines.push(`… and ${more.toLocaleString('en-US')} more problem${more === 1 ? '' : 's'} (the first ${MAX_LISTED_PROBLEMS} are listed).`);
  return lines;
}

export async function loadSettings(path: string | undefined, references: readonly string[]): Promise<PanelConfigFile | undefined> {
  let settings: PanelConfigFile | undefined;
  if (path !== undefined) {
    try {
      settings = await readPanelConfigFile(path);
    } catch (error) {
      if (error instanceof PanelConfigError) throw new CliError(error.message, 2);
      throw error;
    }
  }
  return withReferenceProducts(settings, references);
}


/** Runs one import; returns the exit code (0 on success, including unchanged content). */
export async function runImportCommand(file: string, options: ImportCommandOptions, output: CommandOutput = process): Promise<{ exitCode: number; report: ImportReport }> {
  const fileName = basename(file);
  if (!existsSync(file) || !statSync(file).isFile()) throw new CliError(`${fileName}: no such file.`, 2);
  if (!options.panel || options.panel.trim() === '') throw new CliError('--panel NAME is required.', 2);
  const panelName = checkName(options.panel.trim(), 'panel name');
  if (!panelName.ok) throw new CliError(`--panel: ${panelName.reason}`, 2);
  const scale = options.scale === undefined ? undefined : parseScaleOption(options.scale);
  const settings = await loadSettings(options.settings, options.reference ?? []);
  const db = openStoreForCli(options.db);
  try {
    const report = await importRatings(db, {
      panel: panelName.name,
      fileName,
      source: 'cli',
      input: fileInput(file),
      scale,
      quarantine: options.quarantine ?? false,
      sheet: options.sheet,
      settings,
    });
    if (!report.ok) {
      output.stderr.write(`${[...problemLines(report), report.message].join('\n')}\n`);
      return { exitCode: 1, report };
    }
    const notes = report.findings.map((finding) => `note: ${formatProblemLine(finding)}`);
    const held = report.counts.quarantined > 0 ? [`${report.counts.quarantined} cell(s) are in quarantine; see the imports page to correct them.`] : [];
    output.stdout.write(`${[report.message, ...held, ...notes].join('\n')}\n`);
    return { exitCode: 0, report };
  } finally {
    db.close();
  }
}

const collect = (value: string, previous: string[] = []): string[] => [...previous, value];

export function registerImportCommand(program: Command): void {
  program
    .command('import')
    .description(COMMAND_SUMMARIES.import.description)
    .argument(COMMAND_SUMMARIES.import.operand.name, COMMAND_SUMMARIES.import.operand.description)
    .requiredOption('--panel <name>', 'panel to import into (created when new)')
    .option('--db <path>', 'store file (default: PANEL_STEWARD_DB or data/panel-steward.db)')
    .option('--scale <min:max>', 'scale of attributes new to the panel, e.g. 0:10')
    .option('--quarantine', 'store the valid rows and hold invalid cells for correction')
    .option('--sheet <name>', 'worksheet of an .xlsx file (default: the first)')
    .option('--settings <file>', 'panel settings JSON (scales, anchors, product roles)')
    .option('--reference <code>', 'mark a product as the reference/control (repeatable)', collect)
    .action(async (file: string, options: ImportCommandOptions) => {
      const { exitCode } = await runImportCommand(file, options);
      process.exitCode = exitCode;
    });
}
