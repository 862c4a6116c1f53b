/**
 * `panel-steward analyze FILE [--period] [--format json] [--sheet NAME]`
 *
 * Reads a long or wide CSV/XLSX with the import parser (no store, no scale check), fits the
 * models and prints the analyze JSON of issue 3 on stdout. Any problem in the file stops it:
 * every problem is listed on stderr as `file:row:column: message` and the exit code is 1.
 * Findings and groups that could not be fitted are notes on stderr; stdout stays pure JSON.
 */
import { existsSync, statSync } from 'node:fs';
import { basename } from 'node:path';
import type { Command } from 'commander';
import { analyzeRatingsWithNotes } from '../../analysis/analyze-ratings.js';
import { MAX_LISTED_PROBLEMS, type InputProblem } from '../../domain/problems.js';
import type { Observation } from '../../domain/ratings.js';
import { readRatings } from '../../ingest/read-ratings.js';
import { CliError } from './cli-error.js';
import { formatProblemLine, type CommandOutput } from './import-command.js';

export interface AnalyzeCommandOptions {
  period?: boolean;
  format?: string;
  sheet?: string;
}

const FORMATS = ['json'] as const;

/** Runs one analysis; returns the exit code (0 = JSON printed, 1 = problems in the file). */
export async function runAnalyzeCommand(file: string, options: AnalyzeCommandOptions, output: CommandOutput = process): Promise<number> {
  const format = options.format ?? 'json';
  if (!(FORMATS as readonly string[]).includes(format)) throw new CliError(`--format must be one of: ${FORMATS.join(', ')} (got "${format}").`, 2);
  const fileName = basename(file);
  if (!existsSync(file) || !statSync(file).isFile()) throw new CliError(`${fileName}: no such file.`, 2);

  const observations: Observation[] = [];
  const problems: InputProblem[] = [];
  const notes: string[] = [];
  for await (const event of readRatings({ path: file }, { fileName, sheet: options.sheet, scaleFor: () => 'unchecked' })) {
    if (event.type === 'rating') {
      const { session, assessor, product, replicate, attribute, value } = event.rating;
      observations.push({ session, assessor, product, replicate, attribute, value });
    } else if (event.type === 'problem') problems.push(event.problem);
    else if (event.type === 'finding') notes.push(`note: ${formatProblemLine(event.finding)}`);
  }
  problems.push(...duplicateProblems(observations, fileName));
  if (problems.length > 0) {
    const lines = problems.slice(0, MAX_LISTED_PROBLEMS).map(formatProblemLine);
    const more = problems.length - MAX_LISTED_PROBLEMS;
    if (more > 0) lines.push(`… and ${more.toLocaleString('en-US')} more problem${more === 1 ? '' : 's'} (the first ${MAX_LISTED_PROBLEMS} are listed).`);
    lines.push(`${fileName}: not analysed: ${problems.length.toLocaleString('en-US')} problem${problems.length === 1 ? '' : 's'} to fix first.`);
    output.stderr.write(`${lines.join('\n')}\n`);
    return 1;
  }
  if (observations.length === 0) {
    output.stderr.write(`${fileName}: no ratings to analyse.\n`);
    return 1;
  }
  const { json, notes: fitNotes } = analyzeRatingsWithNotes(dropExactDuplicates(observations, notes), { period: options.period ?? false });
  for (const note of fitNotes) notes.push(`note: ${note.session === null ? '' : `session ${note.session}, `}attribute ${note.attribute}: ${note.message}`);
  if (notes.length > 0) output.stderr.write(`${notes.join('\n')}\n`);
  // JSON.stringify writes the shortest text that reads back to the same double (full precision).
  output.stdout.write(`${JSON.stringify(json, null, 2)}\n`);
  return 0;
}

const keyOf = (row: Observation) => [row.session, row.attribute, row.assessor, row.product, row.replicate].join('\u0000');

/**
 * The same session, attribute, assessor, product and replicate twice with different values
 * cannot be analysed (the store refuses it too). Row numbers are not kept per rating, so the
 * problem names the keys.
 */
function duplicateProblems(observations: readonly Observation[], fileName: string): InputProblem[] {
  const seen = new Map<string, number>();
  const problems: InputProblem[] = [];
  for (const row of observations) {
    const key = keyOf(row);
    const previous = seen.get(key);
    if (previous === undefined) seen.set(key, row.value);
    else if (previous !== row.value) {
      problems.push({
        code: 'conflicting-duplicate',
        file: fileName,
        row: null,
        column: null,
        message: `Session ${row.session}, assessor ${row.assessor}, product ${row.product}, replicate ${row.replicate}, attribute ${row.attribute} has two different values (${previous} and ${row.value}); keep one or number the replicates.`,
      });
    }
  }
  return problems;
}

/** An exact repeat of a rating is counted once, with a note. */
function dropExactDuplicates(observations: readonly Observation[], notes: string[]): Observation[] {
  const seen = new Set<string>();
  const kept: Observation[] = [];
  let dropped = 0;
  for (const row of observations) {
    const key = keyOf(row);
    if (seen.has(key)) dropped++;
    else {
      seen.add(key);
      kept.push(row);
    }
  }
  if (dropped > 0) notes.push(`note: ${dropped} repeated rating${dropped === 1 ? '' : 's'} (same keys and value) counted once.`);
  return kept;
}

export function registerAnalyzeCommand(program: Command): void {
  program
    .command('analyze')
    .description('Fit the panel models to a ratings file (CSV long or wide form, or .xlsx) and print the results; no store needed.')
    .argument('<file>', 'the ratings file')
    .option('--period', 'one period model per attribute over all sessions instead of one model per session and attribute')
    .option('--format <format>', 'output format (json)', 'json')
    .option('--sheet <name>', 'worksheet of an .xlsx file (default: the first)')
    .action(async (file: string, options: AnalyzeCommandOptions) => {
      const exitCode = await runAnalyzeCommand(file, options);
      if (exitCode !== 0) process.exitCode = exitCode;
    });
}
