/**
 * Stage: every rating of the reader's compact batches goes into a TEMP staging table keyed by
 * (session, attribute, assessor, product, replicate), one batch per transaction, so memory stays
 * flat however large the file is. Every staged column but the value is an integer id (memory
 * grows with distinct names only). The key constraint finds exact duplicates (kept once, named as
 * a finding) and conflicting duplicates (a problem naming both rows) as the rows arrive. Cells
 * the reader rejected go into a second TEMP table, held for quarantine. Nothing of the store is
 * written or locked in this stage.
 */
import type { Database, Statement } from 'better-sqlite3';
import type { InputProblem, ProblemCode } from '../../domain/problems.js';
import { LevelCoder } from '../../domain/level-coder.js';
import { classifyRepeat } from '../../ingest/duplicate-rule.js';
import type { RawCell } from '../../ingest/read-ratings.js';
import {
  F_ASSESSOR,
  F_ATTRIBUTE,
  F_CODE,
  F_COLUMN,
  F_DATE,
  F_PRODUCT,
  F_REPLICATE,
  F_ROW,
  F_SESSION,
  KEY_FIELDS,
  NAME_KINDS,
  type CompactBatch,
} from '../../ingest/compact-batches.js';
import { addFinding, addProblem, type ImportTally } from './tally.js';

/** Rows per multi-row INSERT into the staging table (9,216 parameters, under SQLite's 32,766); 1,024 was measured a little faster than 256 for 10⁶ ratings. */
const STAGE_CHUNK_ROWS = 1024;
/** Parameters per staged row. */
const STAGE_FIELDS = 9;
const STAGE_COLUMNS = '(s, attr, assessor, product, rep, value, code, row, col)';

/**
 * Problems about one cell's content, which quarantine can hold for correction. Whole-file,
 * header and row-shape problems, and missing scales, always reject the import.
 */
const QUARANTINABLE: ReadonlySet<ProblemCode> = new Set<ProblemCode>([
  'missing-value',
  'not-a-number',
  'not-finite',
  'replicate-not-positive-integer',
  'invalid-date',
  'out-of-scale',
  'decimal-shift',
  'cell-too-long',
  'header-unknown-column',
]);

let stagingCounter = 0;

/** Names of one import's TEMP tables: staged ratings, and cells held for quarantine. */
export interface StagingTables {
  stage: string;
  held: string;
}

export interface SessionInFile {
  date: string;
  /** Id of the date in the reader's name list. */
  dateId: number;
  firstRow: number;
  /** Another date was seen for this label in the file. */
  dateConflict: boolean;
}

/** The names a compact batch's ids stand for (ids 1-based, in the order the reader met them). */
export interface StagedNames {
  /** In NAME_KINDS order. */
  lists: LevelCoder<string>[];
  sessions: LevelCoder<string>;
  attributes: LevelCoder<string>;
  assessors: LevelCoder<string>;
  products: LevelCoder<string>;
  /** Column headers and sample codes by the ids staged in `col` and `code`. */
  columns: LevelCoder<string>;
  codes: LevelCoder<string>;
  dates: LevelCoder<string>;
}

/** What staging learned about the file, beyond the staged rows. */
export interface StagedFile {
  names: StagedNames;
  /** By session id (index 0 unused). */
  sessionInfo: SessionInFile[];
  /** Session id and date id pairs already reported as a date conflict. */
  dateConflictSeen: Set<string>;
  maxRow: number;
  lastDuplicateRow: number;
  /** The file reader reports missing scales itself (it asks for every attribute's scale). */
  readerAskedForScales: boolean;
}

interface StageStatements {
  findStaged: Statement;
  markConflicted: Statement;
  insertHeld: Statement;
  /** Multi-row INSERTs by row count (prepared on first use). */
  insertRows: Map<number, Statement>;
}

/** The rows of the multi-row INSERT being filled; a chunk never spans batches. */
interface StageChunk {
  /** Nine parameters per row, in STAGE_COLUMNS order; reused for every chunk. */
  args: number[];
  rows: number;
  /** The batch and rating index of the chunk's first row. */
  batch: CompactBatch | null;
  first: number;
}

export interface Stager {
  db: Database;
  tables: StagingTables;
  fileName: string;
  tally: ImportTally;
  file: StagedFile;
  statements: StageStatements;
  chunk: StageChunk;
}

export function createStagingTables(db: Database): StagingTables {
  const tag = `${process.pid}_${++stagingCounter}`;
  const tables = { stage: `temp.stage_${tag}`, held: `temp.held_${tag}` };
  db.exec(`
    -- Keyed in the order files list ratings (session, then assessor, product, replicate, attribute),
    -- so staging appends instead of inserting all over the key tree: about 40 % less staging time.
    -- Every column is an integer (names, sample codes and column headers are ids of the reader's
    -- name lists) except the value: a smaller row and no text to convert per rating.
    CREATE TABLE ${tables.stage} (
      s INTEGER NOT NULL, attr INTEGER NOT NULL, assessor INTEGER NOT NULL, product INTEGER NOT NULL,
      rep INTEGER NOT NULL, value REAL NOT NULL, code INTEGER NOT NULL, row INTEGER NOT NULL, col INTEGER NOT NULL,
      conflicted INTEGER NOT NULL DEFAULT 0,
      PRIMARY KEY (s, assessor, product, rep, attr)
    ) WITHOUT ROWID;
    CREATE TABLE ${tables.held} (
      row INTEGER, col TEXT, session TEXT, date TEXT, assessor TEXT, product TEXT, replicate TEXT,
      attribute TEXT, raw_value TEXT, code TEXT, reason_code TEXT NOT NULL, reason TEXT NOT NULL
    );`);
  return tables;
}

export function dropStagingTables(db: Database, tables: StagingTables): void {
  // The connection may have been closed meanwhile (shutdown); its temp tables went with it.
  if (db.open) db.exec(`DROP TABLE IF EXISTS ${tables.stage}; DROP TABLE IF EXISTS ${tables.held};`);
}

export function openStager(db: Database, tables: StagingTables, tally: ImportTally, fileName: string): Stager {
  const { stage, held } = tables;
  const lists = NAME_KINDS.map(() => new LevelCoder<string>(''));
  const [sessions, attributes, assessors, products, columns, codes, dates] = lists;
  const insertRow = (nRows: number): Statement =>
    db.prepare(`INSERT INTO ${stage} ${STAGE_COLUMNS} VALUES ${Array(nRows).fill('(?, ?, ?, ?, ?, ?, ?, ?, ?)').join(', ')} ON CONFLICT DO NOTHING`);
  return {
    db,
    tables,
    fileName,
    tally,
    file: {
      names: { lists, sessions, attributes, assessors, products, columns, codes, dates },
      sessionInfo: [undefined as unknown as SessionInFile],
      dateConflictSeen: new Set<string>(),
      maxRow: 1,
      lastDuplicateRow: -1,
      readerAskedForScales: false,
    },
    statements: {
      findStaged: db.prepare(`SELECT value, code, row, col FROM ${stage} WHERE s = ? AND attr = ? AND assessor = ? AND product = ? AND rep = ?`),
      markConflicted: db.prepare(`UPDATE ${stage} SET conflicted = 1 WHERE s = ? AND attr = ? AND assessor = ? AND product = ? AND rep = ?`),
      insertHeld: db.prepare(
        `INSERT INTO ${held} (row, col, session, date, assessor, product, replicate, attribute, raw_value, code, reason_code, reason)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
      ),
      // Many rows per statement: binding is the same, statement overhead is paid once per chunk.
      insertRows: new Map<number, Statement>([[1, insertRow(1)], [STAGE_CHUNK_ROWS, insertRow(STAGE_CHUNK_ROWS)]]),
    },
    chunk: { args: new Array<number>(STAGE_CHUNK_ROWS * STAGE_FIELDS).fill(0), rows: 0, batch: null, first: 0 },
  };
}

/** Stages every batch, in reading order, one staging transaction per batch. */
export async function stageBatches(stager: Stager, batches: AsyncIterable<CompactBatch> | Iterable<CompactBatch>): Promise<void> {
  const flush = stager.db.transaction((batch: CompactBatch) => stageBatch(stager, batch));
  for await (const batch of batches) flush(batch);
}

function stageBatch(stager: Stager, batch: CompactBatch): void {
  const { file, chunk, tally } = stager;
  const { lists } = file.names;
  for (let kind = 0; kind < lists.length; kind++) lists[kind].codeAll(batch.newNames[kind] ?? []);
  if (batch.maxRow > file.maxRow) file.maxRow = batch.maxRow;
  tally.counts.missingCells += batch.nMissing;
  const { keys, values, others } = batch;
  const args = chunk.args;
  const sessionInfo = file.sessionInfo;
  let o = 0;
  chunk.batch = batch;
  chunk.first = 0;
  for (let r = 0; r < batch.nRatings; r++) {
    while (o < others.length && others[o].at === r) other(stager, others[o++].event);
    const k = r * KEY_FIELDS;
    const s = keys[k + F_SESSION];
    const info = sessionInfo[s];
    if (info === undefined || info.dateId !== keys[k + F_DATE]) checkSessionDate(stager, s, keys[k + F_DATE], keys[k + F_ROW]);
    if (chunk.rows === STAGE_CHUNK_ROWS) {
      stageChunk(stager);
      chunk.first = r;
    }
    const c = chunk.rows * STAGE_FIELDS;
    args[c] = s;
    args[c + 1] = keys[k + F_ATTRIBUTE];
    args[c + 2] = keys[k + F_ASSESSOR];
    args[c + 3] = keys[k + F_PRODUCT];
    args[c + 4] = keys[k + F_REPLICATE];
    args[c + 5] = values[r];
    args[c + 6] = keys[k + F_CODE];
    args[c + 7] = keys[k + F_ROW];
    args[c + 8] = keys[k + F_COLUMN];
    chunk.rows++;
  }
  while (o < others.length) other(stager, others[o++].event);
  stageChunk(stager);
}

/** A short chunk (the end of a batch) goes in as a few power-of-two pieces, not row by row. */
function stageChunk(stager: Stager): void {
  const { chunk } = stager;
  let done = 0;
  for (let size = STAGE_CHUNK_ROWS; size >= 1; size >>= 1) {
    if (chunk.rows - done >= size) {
      stageRows(stager, done, size);
      done += size;
    }
  }
  chunk.rows = 0;
}

function stageRows(stager: Stager, first: number, nRows: number): void {
  const { chunk, statements } = stager;
  let insert = statements.insertRows.get(nRows);
  if (insert === undefined) {
    insert = stager.db.prepare(
      `INSERT INTO ${stager.tables.stage} ${STAGE_COLUMNS} VALUES ${Array(nRows).fill('(?, ?, ?, ?, ?, ?, ?, ?, ?)').join(', ')} ON CONFLICT DO NOTHING`,
    );
    statements.insertRows.set(nRows, insert);
  }
  const args = nRows === STAGE_CHUNK_ROWS ? chunk.args : chunk.args.slice(first * STAGE_FIELDS, (first + nRows) * STAGE_FIELDS);
  // Fast path: every row new. Otherwise look at each row (rare: duplicates).
  if (insert.run(args).changes === nRows) stager.tally.counts.ratings += nRows;
  else for (let i = first; i < first + nRows; i++) settle(stager, chunk.batch!, chunk.first + i);
}

/** After an insert that may have been skipped: was it this rating's row, an exact copy, or a conflict? */
function settle(stager: Stager, batch: CompactBatch, r: number): void {
  const { file, tally, statements, fileName } = stager;
  const { sessions, attributes, assessors, products, columns, codes, dates } = file.names;
  const codeOrNull = (id: number): string | null => (id === 0 ? null : codes.names[id]);
  const k = r * KEY_FIELDS;
  const keys = batch.keys;
  const key = [keys[k + F_SESSION], keys[k + F_ATTRIBUTE], keys[k + F_ASSESSOR], keys[k + F_PRODUCT], keys[k + F_REPLICATE]];
  const row = keys[k + F_ROW];
  const column = keys[k + F_COLUMN];
  const code = keys[k + F_CODE];
  const value = batch.values[r];
  const earlier = statements.findStaged.get(...key) as { value: number; code: number; row: number; col: number };
  if (earlier.row === row && earlier.col === column) {
    tally.counts.ratings += 1;
    return;
  }
  const [session, attribute, assessor, product] = [sessions.names[key[0]], attributes.names[key[1]], assessors.names[key[2]], products.names[key[3]]];
  if (classifyRepeat(earlier, { value, code }) === 'exact-repeat') {
    // An exact copy: keep one and name it once per row (a wide row repeats for every attribute).
    if (row !== file.lastDuplicateRow) {
      file.lastDuplicateRow = row;
      addFinding(tally, {
        code: 'duplicate-row',
        file: fileName,
        row,
        column: null,
        message: `Row ${row} repeats row ${earlier.row} exactly; it was counted once.`,
        session,
        assessor,
        product,
        attribute,
      });
    }
    return;
  }
  statements.markConflicted.run(...key);
  const [earlierCode, laterCode] = [codeOrNull(earlier.code), codeOrNull(code)];
  const reason = `Row ${row} gives ${value} for session "${session}", assessor ${assessor}, product ${product}, replicate ${key[4]}, attribute ${attribute}, but row ${earlier.row} gives ${earlier.value}${earlierCode !== laterCode ? ` (sample codes ${earlierCode ?? 'none'} and ${laterCode ?? 'none'})` : ''}; keep only the correct one.`;
  addProblem(tally, { code: 'conflicting-duplicate', file: fileName, row, column: columns.names[column], message: reason, value: String(value) });
  const date = dates.names[keys[k + F_DATE]];
  statements.insertHeld.run(row, columns.names[column], session, date, assessor, product, String(key[4]), attribute, String(value), laterCode, 'conflicting-duplicate', reason);
}

/** A session's first date, or a conflict with it (one problem per session and date). */
function checkSessionDate(stager: Stager, s: number, dateId: number, row: number): void {
  const { file } = stager;
  const { dates, sessions } = file.names;
  const info = file.sessionInfo[s];
  if (info === undefined) {
    file.sessionInfo[s] = { date: dates.names[dateId], dateId, firstRow: row, dateConflict: false };
    return;
  }
  if (info.dateId === dateId) return;
  info.dateConflict = true;
  const seenKey = `${s}\u0000${dateId}`;
  if (file.dateConflictSeen.has(seenKey)) return;
  file.dateConflictSeen.add(seenKey);
  const date = dates.names[dateId];
  addProblem(stager.tally, {
    code: 'session-date-conflict',
    file: stager.fileName,
    row,
    column: 'date',
    message: `Session "${sessions.names[s]}" is dated ${date} here but ${info.date} in row ${info.firstRow}; a session has one date, so correct one of them or give the sessions different labels.`,
    value: date,
  });
}

/** A problem or finding the reader reported between ratings. */
function other(stager: Stager, event: CompactBatch['others'][number]['event']): void {
  const { tally } = stager;
  if (event.type === 'finding') {
    addFinding(tally, event.finding);
    return;
  }
  const { problem, cell } = event;
  if (problem.code === 'scale-missing') stager.file.readerAskedForScales = true;
  addProblem(tally, problem);
  if (problem.row === null || !QUARANTINABLE.has(problem.code)) {
    tally.unquarantinableErrors += 1;
    return;
  }
  // A row's cells travel with its first problem; its further problems carry none.
  if (!cell) return;
  for (const rejected of [cell, ...(event.moreCells ?? [])]) holdCell(stager.statements.insertHeld, problem, rejected);
}

function holdCell(insertHeld: Statement, problem: InputProblem, cell: RawCell): void {
  insertHeld.run(
    problem.row,
    problem.column,
    cell.session,
    cell.date,
    cell.assessor,
    cell.product,
    cell.replicate,
    cell.attribute,
    cell.rawValue,
    cell.code,
    problem.code,
    problem.message,
  );
}
