/**
 * `panel-steward analyze FILE [--period] [--format json|text] [--sheet NAME]`
 *
 * Reads a long or wide CSV/XLSX with the import parser (no store, no scale check), fits the
 * models and prints the analyze JSON contract (domain/analysis.ts) on stdout. Any problem in the file stops it:
 * every problem is listed on stderr as `file:row:column: message` and the exit code is 1.
 * Findings and groups that could not be fitted are notes on stderr; stdout stays pure JSON.
 */
import { existsSync, statSync } from 'node:fs';
import { basename } from 'node:path';
import { setFlagsFromString } from 'node:v8';
import type { Command } from 'commander';
import { analyzeRatingColumns, analyzeRatingColumnsInto, type AnalyzeNote } from '../../analysis/analyze-ratings.js';
import { LevelCoder } from '../../domain/level-coder.js';
import { MAX_LISTED_PROBLEMS, type InputFinding, type InputProblem } from '../../domain/problems.js';
import type { RatingColumns } from '../../domain/ratings.js';
import { classifyRepeat } from '../../ingest/duplicate-rule.js';
import { readRatingColumns, type ReadColumns } from '../../ingest/read-columns.js';
import { CliError } from './cli-error.js';
import type { CommandOutput } from './import-command.js';
import { COMMAND_SUMMARIES } from './command-summaries.js';
import { PrettyJsonObjectWriter, StdoutWriter } from './write-stdout.js';

/**
 * The import command's problem-line format, loaded only when there is a problem or finding to
 * print: its module brings the store (better-sqlite3 and the config schema) with it, a tenth of
 * a second of start-up that a clean file never needs.
 */
async function problemLineFormatter(): Promise<(problem: InputProblem | InputFinding) => string> {
  return (await import('./import-command.js')).formatProblemLine;
}

export interface AnalyzeCommandOptions {
  period?: boolean;
  format?: string;
  sheet?: string;
}

const FORMATS = ['json', 'text'] as const;

/** Runs one analysis; returns the exit code (0 = JSON printed, 1 = problems in the file). */
export async function runAnalyzeCommand(file: string, options: AnalyzeCommandOptions, output: CommandOutput = process): Promise<number> {
  const format = options.format ?? 'json';
  if (!(FORMATS as readonly string[]).includes(format)) throw new CliError(`--format must be one of: ${FORMATS.join(', ')} (got "${format}").`, 2);
  const fileName = basename(file);
  if (!existsSync(file) || !statSync(file).isFile()) throw new CliError(`${fileName}: no such file.`, 2);

  const read = await readRatingColumns({ path: file }, { fileName, sheet: options.sheet, scaleFor: () => 'unchecked' });
  const { problems, findings } = read;
  const duplicates = checkDuplicates(read, fileName);
  problems.push(...duplicates.problems);
  const formatProblemLine = problems.length > 0 || findings.length > 0 ? await problemLineFormatter() : null;
  const notes = findings.map((finding) => `note: ${formatProblemLine!(finding)}`);
  if (problems.length > 0) {
    const lines = problems.slice(0, MAX_LISTED_PROBLEMS).map(formatProblemLine!);
    const more = problems.length - MAX_LISTED_PROBLEMS;
    if (more > 0) lines.push(`… and ${more.toLocaleString('en-US')} more problem${more === 1 ? '' : 's'} (the first ${MAX_LISTED_PROBLEMS} are listed).`);
    lines.push(`${fileName}: not analysed: ${problems.length.toLocaleString('en-US')} problem${problems.length === 1 ? '' : 's'} to fix first.`);
    output.stderr.write(`${lines.join('\n')}\n`);
    return 1;
  }
  if (read.columns.n === 0) {
    output.stderr.write(`${fileName}: no ratings to analyse.\n`);
    return 1;
  }
  const dropped = read.columns.n - duplicates.kept.n;
  if (dropped > 0) notes.push(`note: ${dropped} repeated rating${dropped === 1 ? '' : 's'} (same keys and value) counted once.`);
  const analyzeOptions = {
    period: options.period ?? false,
    // A fault of the program, not of the file: its stack goes to stderr for the bug report.
    onFitFailure: (error: unknown, where: { session: string | null; attribute: string }) =>
      output.stderr.write(`error: ${where.session === null ? '' : `session ${where.session}, `}attribute ${where.attribute}: the fit failed unexpectedly\n${error instanceof Error ? (error.stack ?? error.message) : String(error)}\n`),
  };
  const writeNotes = (fitNotes: AnalyzeNote[]): void => {
    for (const note of fitNotes) notes.push(`note: ${note.session === null ? '' : `session ${note.session}, `}attribute ${note.attribute}: ${note.message}`);
    if (notes.length > 0) output.stderr.write(`${notes.join('\n')}\n`);
  };
  if (format === 'text') {
    const { json, notes: fitNotes } = analyzeRatingColumns(duplicates.kept, analyzeOptions);
    writeNotes(fitNotes);
    output.stdout.write((await import('./analyze-text.js')).formatAnalyzeText(json));
    return 0;
  }
  // The JSON is written as it is made, fits then indices, exactly as JSON.stringify(json, null, 2)
  // (the shortest text that reads back to the same double: full precision). Every problem of the
  // file was found above, so nothing is written for a file that cannot be analysed.
  const writer = new PrettyJsonObjectWriter(new StdoutWriter(output));
  let section: 'fits' | 'assessorIndices' | null = null;
  const enter = (key: 'fits' | 'assessorIndices'): void => {
    if (section === key) return;
    if (section !== null) writer.close();
    writer.open(key);
    section = key;
  };
  enter('fits');
  const { notFitted, notes: fitNotes } = analyzeRatingColumnsInto(duplicates.kept, analyzeOptions, {
    fit: (fit) => writer.items([fit]),
    indices: (rows) => {
      enter('assessorIndices');
      writer.items(rows);
    },
  });
  enter('assessorIndices');
  writer.close();
  if (notFitted.length > 0) {
    writer.open('notFitted');
    writer.items(notFitted);
    writer.close();
  }
  writer.end();
  writeNotes(fitNotes);
  return 0;
}

/**
 * The import's duplicate rule (ingest/duplicate-rule.ts) over the file: a conflicting copy cannot
 * be analysed, one problem per later rating that differs from the first; an exact repeat is
 * counted once (`kept` holds the first of each key, in order). Row numbers are not kept per
 * rating, so the problem names the keys.
 */
function checkDuplicates(read: ReadColumns, fileName: string): { problems: InputProblem[]; kept: RatingColumns } {
  const { columns, code, codeNames } = read;
  const firstRowOfKey = ratingKeyIndex(columns);
  const problems: InputProblem[] = [];
  const keptRows = new Int32Array(columns.n);
  let nKept = 0;
  for (let i = 0; i < columns.n; i++) {
    const first = firstRowOfKey[i];
    if (first === i) {
      keptRows[nKept++] = i;
      continue;
    }
    const earlier = { value: columns.value[first], code: code[first] };
    const later = { value: columns.value[i], code: code[i] };
    if (classifyRepeat(earlier, later) !== 'conflict') continue;
    const [earlierCode, laterCode] = [code[first] === 0 ? null : codeNames[code[first]], code[i] === 0 ? null : codeNames[code[i]]];
    problems.push({
      code: 'conflicting-duplicate',
      file: fileName,
      row: null,
      column: null,
      message: `Session ${columns.sessionNames[columns.session[i]]}, assessor ${columns.assessorNames[columns.assessor[i]]}, product ${columns.productNames[columns.product[i]]}, replicate ${columns.replicate[i]}, attribute ${columns.attributeNames[columns.attribute[i]]} has ${earlier.value !== later.value ? `two different values (${earlier.value} and ${later.value})` : `the value ${later.value} twice`}${earlierCode !== laterCode ? ` with sample codes ${earlierCode ?? 'none'} and ${laterCode ?? 'none'}` : ''}; keep one or number the replicates.`,
    });
  }
  if (nKept === columns.n) return { problems, kept: columns };
  const rows = keptRows.subarray(0, nKept);
  const pick = <T extends Int32Array | Float64Array>(column: T): T => {
    const out = new (column.constructor as new (n: number) => T)(rows.length);
    for (let k = 0; k < rows.length; k++) out[k] = column[rows[k]];
    return out;
  };
  const kept: RatingColumns = {
    ...columns,
    n: rows.length,
    session: pick(columns.session),
    attribute: pick(columns.attribute),
    assessor: pick(columns.assessor),
    product: pick(columns.product),
    replicate: pick(columns.replicate),
    value: pick(columns.value),
  };
  return { problems, kept };
}

/**
 * For each rating, the index of the first rating with the same five keys. The reader already
 * gives the names as dense ids; the replicate numbers are coded here, and the five codes combine
 * into one number, so no key string is built per rating (75 000 ratings a year).
 */
function ratingKeyIndex(columns: RatingColumns): Int32Array {
  const n = columns.n;
  const replicates = codeReplicates(columns.replicate, n);
  const coded: [Int32Array, number][] = [
    [columns.session, columns.sessionNames.length],
    [columns.attribute, columns.attributeNames.length],
    [columns.assessor, columns.assessorNames.length],
    [columns.product, columns.productNames.length],
    [replicates.codes, replicates.size],
  ];
  const keys = new Float64Array(n);
  let keySpace = 1;
  for (const [column, size] of coded) {
    keySpace *= size;
    appendKey(keys, column, size);
    // Renumber the combinations present when the space grows large, so the next product stays
    // far below 2^53 (exact in a double); panels of real size never get here.
    if (keySpace > 4 * n + 4096) keySpace = renumber(keys);
  }
  // keySpace ≤ 4n + 4096 here: a lookup table instead of a hash map.
  return firstRowOfKeys(keys, keySpace);
}

// Each loop over the ratings is a function of its own: a loop that runs 75 000 times is compiled
// while it runs, and code after it in the same function would throw that compiled code away.

/** Replicate numbers as dense codes; small ones (nearly all) through a lookup table. */
function codeReplicates(replicate: Int32Array, n: number): { codes: Int32Array; size: number } {
  const replicates = new LevelCoder<number>();
  const smallReplicateCode = new Int32Array(64).fill(-1);
  const codes = new Int32Array(n);
  for (let i = 0; i < n; i++) {
    const value = replicate[i];
    if (value >= 0 && value < 64) {
      let code = smallReplicateCode[value];
      if (code < 0) code = smallReplicateCode[value] = replicates.code(value);
      codes[i] = code;
    } else codes[i] = replicates.code(value);
  }
  return { codes, size: replicates.size };
}

function appendKey(keys: Float64Array, column: Int32Array, size: number): void {
  for (let i = 0; i < keys.length; i++) keys[i] = keys[i] * size + column[i];
}

function firstRowOfKeys(keys: Float64Array, keySpace: number): Int32Array {
  const n = keys.length;
  const firstRow = new Int32Array(n);
  const firstOfKey = new Int32Array(keySpace).fill(-1);
  for (let i = 0; i < n; i++) {
    if (firstOfKey[keys[i]] < 0) firstOfKey[keys[i]] = i;
    firstRow[i] = firstOfKey[keys[i]];
  }
  return firstRow;
}

/** Replaces each key by a dense code (first-seen order); returns the number of codes. */
function renumber(keys: Float64Array): number {
  const codeOf = new Map<number, number>();
  for (let i = 0; i < keys.length; i++) {
    let code = codeOf.get(keys[i]);
    if (code === undefined) codeOf.set(keys[i], (code = codeOf.size));
    keys[i] = code;
  }
  return codeOf.size;
}

/**
 * `analyze` is one short process, and most of it runs before V8's optimising compiler has caught
 * up: on a 2-core machine its background thread is busy from start to end (bench/README.md, "The
 * optimising compiler is the bottleneck"). Without inlining and loop peeling each
 * optimising compile is cheaper and the hot code is ready sooner: a year 0.60 s → 0.54 s. These
 * passes change how fast the code runs, never what it computes (JavaScript arithmetic is the same
 * IEEE operations either way), so the JSON is byte-identical. Only this command's process is
 * affected: the service and the tests keep V8's defaults.
 */
function compileForOneShotRun(): void {
  setFlagsFromString('--no-turbo-inlining');
  setFlagsFromString('--no-turbo-loop-peeling');
}

export function registerAnalyzeCommand(program: Command): void {
  program
    .command('analyze')
    .description(COMMAND_SUMMARIES.analyze.description)
    .argument(COMMAND_SUMMARIES.analyze.operand.name, COMMAND_SUMMARIES.analyze.operand.description)
    .option('--period', 'one period model per attribute over all sessions instead of one model per session and attribute')
    .option('--format <format>', 'output format: json (every number) or text (a readable summary)', 'json')
    .option('--sheet <name>', 'worksheet of an .xlsx file (default: the first)')
    .action(async (file: string, options: AnalyzeCommandOptions) => {
      compileForOneShotRun();
      const exitCode = await runAnalyzeCommand(file, options);
      if (exitCode !== 0) process.exitCode = exitCode;
    });
}
