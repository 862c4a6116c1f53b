/**
 * The import transaction, fed by the reader's compact batches (ingest/compact-batches.ts: ratings
 * as typed arrays of name ids, plus problems and findings), in reading order. `importRatings`
 * (import-ratings.ts) wires the file reader to this, on a worker thread for large files; tests
 * may feed read events directly (importRatingEvents encodes them on this thread).
 *
 * Shape of the work:
 * 1. Stream: every rating goes into a TEMP staging table keyed by (session, attribute, assessor,
 *    product, replicate), one batch per transaction, so memory stays flat however large the file
 *    is. Every staged column but the value is an integer id (memory grows with distinct names only).
 *    The key constraint finds exact duplicates (kept once, named as a finding) and conflicting
 *    duplicates (a problem naming both rows) as the rows arrive. Nothing of the store is
 *    written or locked in this phase.
 * 2. Decide: missing scales, session dates against the store; problems → reject (default) or
 *    quarantine the offending cells.
 * 3. Write: one IMMEDIATE transaction, synchronous, so a crash at any moment leaves all of it
 *    or none of it (WAL), and no other request on the shared connection can interleave.
 */
import type { Database } from 'better-sqlite3';
import type { InputFinding, InputProblem, ProblemCode } from '../domain/problems.js';
import { LevelCoder } from '../domain/level-coder.js';
import { MAX_LISTED_PROBLEMS } from '../domain/problems.js';
import type { ImportSource, Rating, ScaleRange } from '../domain/ratings.js';
import { classifyRepeat } from '../ingest/duplicate-rule.js';
import type { RawCell, ReadEvent } from '../ingest/read-ratings.js';
import {
  compactBatches,
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
} from '../ingest/compact-batches.js';
import type { PanelConfigFile } from './panel-config.js';

import type { ImportCounts, ImportOutcome } from '../domain/imports.js';
export type { ImportCounts, ImportOutcome } from '../domain/imports.js';

export interface ImportReport {
  ok: boolean;
  outcome: ImportOutcome;
  importId: number | null;
  panel: string;
  fileName: string;
  sha256: string;
  counts: ImportCounts;
  /** Labels of the sessions that were added or replaced. */
  changedSessions: string[];
  findings: InputFinding[];
  /** The first MAX_LISTED_PROBLEMS problems. */
  errors: InputProblem[];
  totalErrors: number;
  /** One plain sentence for a person. */
  message: string;
}

/** What the reader yields (ingest/read-ratings.ts). */
export type ImportEvent = ReadEvent;

export interface ImportEventsRequest {
  panel: string;
  fileName: string;
  source: ImportSource;
  /** SHA-256 of the file content (hex); a promise when it is computed while the file streams. */
  sha256: string | Promise<string>;
  scale?: ScaleRange;
  quarantine: boolean;
  settings?: PanelConfigFile;
  now?: () => Date;
  /** Told when the file has been read and the write transaction begins, and when it has committed. */
  onPhase?: (phase: ImportPhase) => void;
}

export type ImportPhase = 'writing' | 'committed';

/** Rows per multi-row INSERT into the staging table (9,216 parameters, under SQLite's 32,766); 1,024 was measured a little faster than 256 for 10⁶ ratings. */
const STAGE_CHUNK_ROWS = 1024;
/** Parameters per staged row. */
const STAGE_FIELDS = 9;
/** Findings of one kind listed in the report (the total is in the message). */
const MAX_LISTED_FINDINGS_PER_CODE = MAX_LISTED_PROBLEMS;

let stagingCounter = 0;

/** The scale a new attribute gets: its own in the settings file, else --scale, else the settings default. */
export function scaleForNewAttribute(name: string, scale: ScaleRange | undefined, settings: PanelConfigFile | undefined): ScaleRange | undefined {
  const own = settings?.attributes?.[name];
  if (own) return { min: own.min, max: own.max };
  return scale ?? settings?.scale;
}

/** Stored scales of a panel's attributes (empty when the panel does not exist yet). */
export function storedScales(db: Database, panel: string): Map<string, ScaleRange> {
  const rows = db
    .prepare(
      `SELECT a.name, a.scale_min AS min, a.scale_max AS max FROM attribute a JOIN panel p ON p.id = a.panel_id WHERE p.name = ?`,
    )
    .all(panel) as { name: string; min: number; max: number }[];
  return new Map(rows.map((row) => [row.name, { min: row.min, max: row.max }]));
}

/** Looks for an earlier import of the same content into the same panel that wrote something. */
export function findEarlierImport(db: Database, panel: string, sha256: string): { id: number; startedAt: string } | undefined {
  return db
    .prepare(
      `SELECT i.id, i.started_at AS startedAt FROM import i JOIN panel p ON p.id = i.panel_id
       WHERE p.name = ? AND i.content_sha256 = ? AND i.outcome IN ('imported', 'quarantined')
       ORDER BY i.id DESC LIMIT 1`,
    )
    .get(panel, sha256) as { id: number; startedAt: string } | undefined;
}

function emptyCounts(): ImportCounts {
  return { rows: 0, ratings: 0, missingCells: 0, sessions: 0, sessionsNew: 0, sessionsReplaced: 0, sessionsUnchanged: 0, valuesReplaced: 0, quarantined: 0 };
}

/**
 * The answer for content already imported into the panel: nothing is written but the attempt,
 * so the imports page can show it.
 */
export function unchangedReport(
  db: Database,
  request: Omit<ImportEventsRequest, 'sha256'> & { sha256: string },
  earlier: { id: number; startedAt: string },
): ImportReport {
  const base: Omit<ImportReport, 'importId'> = {
    ok: true,
    outcome: 'unchanged',
    panel: request.panel,
    fileName: request.fileName,
    sha256: request.sha256,
    counts: emptyCounts(),
    changedSessions: [],
    findings: [],
    errors: [],
    totalErrors: 0,
    message: `${request.fileName} has the same content as import #${earlier.id} of ${earlier.startedAt.slice(0, 10)} into panel "${request.panel}"; nothing changed.`,
  };
  return { ...base, importId: recordAttempt(db, request, base) as number };
}

/**
 * Records an attempt that wrote no ratings (rejected, or unchanged content) in the import log.
 * The log belongs to a panel (every import row names one), so a rejected import into a panel
 * the store does not have yet is not logged at all: creating the panel only to log the rejection
 * would leave an empty panel behind, and a rejection writes nothing. The person still gets the
 * whole answer (problems by file, row and column); the returned id is then null.
 */
export function recordAttempt(db: Database, request: Omit<ImportEventsRequest, 'sha256'> & { sha256: string }, report: Omit<ImportReport, 'importId'>): number | null {
  const now = (request.now ?? (() => new Date()))().toISOString();
  return db.transaction((): number | null => {
    const panel = db.prepare('SELECT id FROM panel WHERE name = ?').get(request.panel) as { id: number } | undefined;
    if (panel === undefined && report.outcome === 'rejected') return null;
    const panelId = panel?.id ?? ensurePanel(db, request.panel, now);
    const info = db
      .prepare(
        `INSERT INTO import (panel_id, file_name, content_sha256, source, started_at, finished_at, outcome,
           n_rows, n_ratings, n_sessions, n_replaced, n_quarantined, n_errors, report_json)
         VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, 0, 0, ?, ?)`,
      )
      .run(panelId, request.fileName, request.sha256, request.source, now, now, report.outcome, report.counts.rows, report.counts.ratings, report.counts.sessions, report.totalErrors, '{}');
    const importId = Number(info.lastInsertRowid);
    db.prepare('UPDATE import SET report_json = ? WHERE id = ?').run(JSON.stringify({ ...report, importId }), importId);
    return importId;
  }).immediate();
}

function ensurePanel(db: Database, name: string, nowIso: string): number {
  db.prepare('INSERT INTO panel (name, created_at) VALUES (?, ?) ON CONFLICT (name) DO NOTHING').run(name, nowIso);
  return (db.prepare('SELECT id FROM panel WHERE name = ?').get(name) as { id: number }).id;
}

interface SessionInFile {
  date: string;
  /** Id of the date in the reader's name list. */
  dateId: number;
  firstRow: number;
  /** Another date was seen for this label in the file. */
  dateConflict: boolean;
}

const plural = (n: number, one: string, many = `${one}s`): string => `${n.toLocaleString('en-US')} ${n === 1 ? one : many}`;

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

/** Thrown inside the write transaction to roll it back with the problems found there. */
class RejectImport extends Error {}

/**
 * Runs one import from a stream of read events (encoded into compact batches on this thread).
 * Never throws for bad input: problems come back in the report (outcome 'rejected').
 */
export function importRatingEvents(
  db: Database,
  request: ImportEventsRequest,
  events: AsyncIterable<ImportEvent | ImportEvent[]> | Iterable<ImportEvent | ImportEvent[]>,
): Promise<ImportReport> {
  return importRatingBatches(db, request, compactBatches(events));
}

/**
 * Runs one import from the reader's compact batches (ingest/compact-batches.ts), in reading
 * order, e.g. as a worker thread posts them. See the module comment for the phases.
 * Never throws for bad input: problems come back in the report (outcome 'rejected').
 */
export async function importRatingBatches(
  db: Database,
  request: ImportEventsRequest,
  batches: AsyncIterable<CompactBatch> | Iterable<CompactBatch>,
): Promise<ImportReport> {
  const { panel, fileName } = request;
  let sha256 = typeof request.sha256 === 'string' ? request.sha256 : '';
  const counts = emptyCounts();
  const errors: InputProblem[] = [];
  let totalErrors = 0;
  let unquarantinableErrors = 0;
  const findings: InputFinding[] = [];
  const findingsPerCode = new Map<string, number>();
  const addProblem = (problem: InputProblem): void => {
    totalErrors += 1;
    if (errors.length < MAX_LISTED_PROBLEMS) errors.push(problem);
  };
  const addFinding = (finding: InputFinding): void => {
    const seen = (findingsPerCode.get(finding.code) ?? 0) + 1;
    findingsPerCode.set(finding.code, seen);
    if (seen <= MAX_LISTED_FINDINGS_PER_CODE) findings.push(finding);
  };

  const tag = `${process.pid}_${++stagingCounter}`;
  const stage = `temp.stage_${tag}`;
  const held = `temp.held_${tag}`;
  db.exec(`
    -- Keyed in the order files list ratings (session, then assessor, product, replicate, attribute),
    -- so staging appends instead of inserting all over the key tree: about 40 % less staging time.
    -- Every column is an integer (names, sample codes and column headers are ids of the reader's
    -- name lists) except the value: a smaller row and no text to convert per rating.
    CREATE TABLE ${stage} (
      s INTEGER NOT NULL, attr INTEGER NOT NULL, assessor INTEGER NOT NULL, product INTEGER NOT NULL,
      rep INTEGER NOT NULL, value REAL NOT NULL, code INTEGER NOT NULL, row INTEGER NOT NULL, col INTEGER NOT NULL,
      conflicted INTEGER NOT NULL DEFAULT 0,
      PRIMARY KEY (s, assessor, product, rep, attr)
    ) WITHOUT ROWID;
    CREATE TABLE ${held} (
      row INTEGER, col TEXT, session TEXT, date TEXT, assessor TEXT, product TEXT, replicate TEXT,
      attribute TEXT, raw_value TEXT, code TEXT, reason_code TEXT NOT NULL, reason TEXT NOT NULL
    );`);
  try {
    // The names a compact batch's ids stand for (ids 1-based, in the order the reader met them).
    const nameLists = NAME_KINDS.map(() => new LevelCoder<string>(''));
    const [sessions, attributes, assessors, products, columns, codes, dates] = nameLists;
    const sessionInfo: SessionInFile[] = [undefined as unknown as SessionInFile];
    const dateConflictSeen = new Set<string>();
    let maxRow = 1;
    let lastDuplicateRow = -1;
    // The file reader reports missing scales itself (it asks for every attribute's scale).
    let readerAskedForScales = false;

    const STAGE_COLUMNS = '(s, attr, assessor, product, rep, value, code, row, col)';
    const insertStage = db.prepare(`INSERT INTO ${stage} ${STAGE_COLUMNS} VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?) ON CONFLICT DO NOTHING`);
    // Many rows per statement: binding is the same, statement overhead is paid once per chunk.
    const insertStageChunk = db.prepare(
      `INSERT INTO ${stage} ${STAGE_COLUMNS} VALUES ${Array(STAGE_CHUNK_ROWS).fill('(?, ?, ?, ?, ?, ?, ?, ?, ?)').join(', ')} ON CONFLICT DO NOTHING`,
    );
    const findStaged = db.prepare(`SELECT value, code, row, col FROM ${stage} WHERE s = ? AND attr = ? AND assessor = ? AND product = ? AND rep = ?`);
    const markConflicted = db.prepare(`UPDATE ${stage} SET conflicted = 1 WHERE s = ? AND attr = ? AND assessor = ? AND product = ? AND rep = ?`);
    const insertHeld = db.prepare(
      `INSERT INTO ${held} (row, col, session, date, assessor, product, replicate, attribute, raw_value, code, reason_code, reason)
       VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
    );

    /** Nine parameters per row, in STAGE_COLUMNS order; reused for every chunk. */
    const chunkArgs: number[] = new Array<number>(STAGE_CHUNK_ROWS * STAGE_FIELDS).fill(0);
    let chunkRows = 0;
    /** The batch and rating index of the chunk's first row (a chunk never spans batches). */
    let chunkBatch: CompactBatch | null = null;
    let chunkFirst = 0;
    const codeOrNull = (id: number): string | null => (id === 0 ? null : codes.names[id]);
    /** After an insert that may have been skipped: was it this rating's row, an exact copy, or a conflict? */
    const settle = (batch: CompactBatch, r: number): void => {
      const k = r * KEY_FIELDS;
      const keys = batch.keys;
      const key = [keys[k + F_SESSION], keys[k + F_ATTRIBUTE], keys[k + F_ASSESSOR], keys[k + F_PRODUCT], keys[k + F_REPLICATE]];
      const row = keys[k + F_ROW];
      const column = keys[k + F_COLUMN];
      const code = keys[k + F_CODE];
      const value = batch.values[r];
      const earlier = findStaged.get(...key) as { value: number; code: number; row: number; col: number };
      if (earlier.row === row && earlier.col === column) {
        counts.ratings += 1;
        return;
      }
      const [session, attribute, assessor, product] = [sessions.names[key[0]], attributes.names[key[1]], assessors.names[key[2]], products.names[key[3]]];
      if (classifyRepeat(earlier, { value, code }) === 'exact-repeat') {
        // An exact copy: keep one and name it once per row (a wide row repeats for every attribute).
        if (row !== lastDuplicateRow) {
          lastDuplicateRow = row;
          addFinding({
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
      markConflicted.run(...key);
      const [earlierCode, laterCode] = [codeOrNull(earlier.code), codeOrNull(code)];
      const reason = `Row ${row} gives ${value} for session "${session}", assessor ${assessor}, product ${product}, replicate ${key[4]}, attribute ${attribute}, but row ${earlier.row} gives ${earlier.value}${earlierCode !== laterCode ? ` (sample codes ${earlierCode ?? 'none'} and ${laterCode ?? 'none'})` : ''}; keep only the correct one.`;
      addProblem({ code: 'conflicting-duplicate', file: fileName, row, column: columns.names[column], message: reason, value: String(value) });
      const date = dates.names[keys[k + F_DATE]];
      insertHeld.run(row, columns.names[column], session, date, assessor, product, String(key[4]), attribute, String(value), laterCode, 'conflicting-duplicate', reason);
    };
    /** Multi-row INSERTs for chunks shorter than STAGE_CHUNK_ROWS, by power-of-two row count (prepared on first use). */
    const insertStageRows = new Map<number, ReturnType<Database['prepare']>>([[1, insertStage], [STAGE_CHUNK_ROWS, insertStageChunk]]);
    const stageRows = (first: number, nRows: number): void => {
      let insert = insertStageRows.get(nRows);
      if (insert === undefined) {
        insert = db.prepare(`INSERT INTO ${stage} ${STAGE_COLUMNS} VALUES ${Array(nRows).fill('(?, ?, ?, ?, ?, ?, ?, ?, ?)').join(', ')} ON CONFLICT DO NOTHING`);
        insertStageRows.set(nRows, insert);
      }
      const args = nRows === STAGE_CHUNK_ROWS ? chunkArgs : chunkArgs.slice(first * STAGE_FIELDS, (first + nRows) * STAGE_FIELDS);
      // Fast path: every row new. Otherwise look at each row (rare: duplicates).
      if (insert.run(args).changes === nRows) counts.ratings += nRows;
      else for (let i = first; i < first + nRows; i++) settle(chunkBatch!, chunkFirst + i);
    };
    const stageChunk = (): void => {
      // A short chunk (the end of a batch) goes in as a few power-of-two pieces, not row by row.
      let done = 0;
      for (let size = STAGE_CHUNK_ROWS; size >= 1; size >>= 1) {
        if (chunkRows - done >= size) {
          stageRows(done, size);
          done += size;
        }
      }
      chunkRows = 0;
    };
    /** A session's first date, or a conflict with it (one problem per session and date). */
    const checkSessionDate = (s: number, dateId: number, row: number): void => {
      let info = sessionInfo[s];
      if (info === undefined) {
        sessionInfo[s] = { date: dates.names[dateId], dateId, firstRow: row, dateConflict: false };
        return;
      }
      if (info.dateId === dateId) return;
      info.dateConflict = true;
      const seenKey = `${s}\u0000${dateId}`;
      if (dateConflictSeen.has(seenKey)) return;
      dateConflictSeen.add(seenKey);
      const date = dates.names[dateId];
      addProblem({
        code: 'session-date-conflict',
        file: fileName,
        row,
        column: 'date',
        message: `Session "${sessions.names[s]}" is dated ${date} here but ${info.date} in row ${info.firstRow}; a session has one date, so correct one of them or give the sessions different labels.`,
        value: date,
      });
    };
    const holdCell = (problem: InputProblem, cell: RawCell): void => {
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
    };
    const other = (event: CompactBatch['others'][number]['event']): void => {
      if (event.type === 'finding') {
        addFinding(event.finding);
        return;
      }
      const { problem, cell } = event;
      if (problem.code === 'scale-missing') readerAskedForScales = true;
      addProblem(problem);
      if (problem.row === null || !QUARANTINABLE.has(problem.code)) {
        unquarantinableErrors += 1;
        return;
      }
      // A row's cells travel with its first problem; its further problems carry none.
      if (!cell) return;
      for (const rejected of [cell, ...(event.moreCells ?? [])]) holdCell(problem, rejected);
    };
    /** One batch, in reading order, in one staging transaction. */
    const flush = db.transaction((batch: CompactBatch) => {
      for (let kind = 0; kind < nameLists.length; kind++) nameLists[kind].codeAll(batch.newNames[kind] ?? []);
      if (batch.maxRow > maxRow) maxRow = batch.maxRow;
      counts.missingCells += batch.nMissing;
      const { keys, values, others } = batch;
      let o = 0;
      chunkBatch = batch;
      chunkFirst = 0;
      for (let r = 0; r < batch.nRatings; r++) {
        while (o < others.length && others[o].at === r) other(others[o++].event);
        const k = r * KEY_FIELDS;
        const s = keys[k + F_SESSION];
        const info = sessionInfo[s];
        if (info === undefined || info.dateId !== keys[k + F_DATE]) checkSessionDate(s, keys[k + F_DATE], keys[k + F_ROW]);
        if (chunkRows === STAGE_CHUNK_ROWS) {
          stageChunk();
          chunkFirst = r;
        }
        const c = chunkRows * STAGE_FIELDS;
        chunkArgs[c] = s;
        chunkArgs[c + 1] = keys[k + F_ATTRIBUTE];
        chunkArgs[c + 2] = keys[k + F_ASSESSOR];
        chunkArgs[c + 3] = keys[k + F_PRODUCT];
        chunkArgs[c + 4] = keys[k + F_REPLICATE];
        chunkArgs[c + 5] = values[r];
        chunkArgs[c + 6] = keys[k + F_CODE];
        chunkArgs[c + 7] = keys[k + F_ROW];
        chunkArgs[c + 8] = keys[k + F_COLUMN];
        chunkRows++;
      }
      while (o < others.length) other(others[o++].event);
      stageChunk();
    });

    for await (const batch of batches) flush(batch);
    sha256 = await request.sha256;
    const resolved = { ...request, sha256 };
    const earlier = findEarlierImport(db, panel, sha256);
    if (earlier) return unchangedReport(db, resolved, earlier);
    counts.rows = maxRow - 1;
    counts.sessions = sessions.names.length - 1;

    // Scales: stored for known attributes, else from the request; none → a problem per attribute.
    const stored = storedScales(db, panel);
    const scaleOf = new Map<number, ScaleRange>();
    for (let id = 1; id < attributes.names.length; id++) {
      const name = attributes.names[id];
      const scale = stored.get(name) ?? scaleForNewAttribute(name, request.scale, request.settings);
      if (scale) {
        scaleOf.set(id, scale);
        continue;
      }
      unquarantinableErrors += 1;
      if (readerAskedForScales) continue;
      const first = db.prepare(`SELECT min(row) AS row, col FROM ${stage} WHERE attr = ?`).get(id) as { row: number; col: number };
      addProblem({
        code: 'scale-missing',
        file: fileName,
        row: first.row,
        column: columns.names[first.col],
        message: `Attribute "${name}" is new to panel "${panel}" and has no scale; give it with --scale MIN:MAX, the scale fields of the upload form, or --settings panel.json.`,
      });
    }

    const reject = (): ImportReport => {
      const base = {
        ok: false,
        outcome: 'rejected' as const,
        panel,
        fileName,
        sha256,
        counts: { ...counts, sessionsNew: 0, sessionsReplaced: 0, sessionsUnchanged: 0, valuesReplaced: 0, quarantined: 0 },
        changedSessions: [],
        findings,
        errors,
        totalErrors,
        message: `${fileName} was not imported: ${plural(totalErrors, 'problem')} found, nothing was written; correct ${totalErrors === 1 ? 'it' : 'them'} and import again${unquarantinableErrors === 0 ? ', or use quarantine to store the valid rows' : ''}.`,
      };
      const importId = recordAttempt(db, resolved, base);
      return { ...base, importId };
    };

    if (totalErrors > 0 && (!request.quarantine || unquarantinableErrors > 0)) return reject();

    const nowIso = (request.now ?? (() => new Date()))().toISOString();
    try {
      request.onPhase?.('writing');
      // Foreign keys are checked per inserted row (five parent look-ups per rating, about a third
      // of the write time); every id written here comes from a row looked up or inserted in this
      // same transaction, so the check cannot fail. The setting is per connection and cannot
      // change inside a transaction: it is switched around this synchronous transaction (no
      // other request can run in between) and restored however it ends.
      const foreignKeys = db.pragma('foreign_keys', { simple: true }) === 1;
      if (foreignKeys) db.pragma('foreign_keys = OFF');
      let committed: ImportReport;
      try {
        committed = db
        .transaction((): ImportReport => {
          const written = writeImport(db, {
            request: resolved, nowIso, stage, held, sessions, attributes, assessors, products, columns, codes, sessionInfo, scaleOf, counts, addProblem,
            settings: request.settings, errorsSoFar: () => totalErrors,
          });
          const outcome: ImportOutcome =
            counts.quarantined > 0 ? 'quarantined' : counts.sessionsNew + counts.sessionsReplaced > 0 ? 'imported' : 'unchanged';
          const report: ImportReport = {
            ok: true,
            outcome,
            importId: written.importId,
            panel,
            fileName,
            sha256,
            counts,
            changedSessions: written.changedSessions,
            findings,
            errors,
            totalErrors,
            message: successMessage(fileName, panel, outcome, counts),
          };
          db.prepare('UPDATE import SET outcome = ?, report_json = ? WHERE id = ?').run(outcome, JSON.stringify(report), written.importId);
          return report;
        })
        .immediate();
      } finally {
        if (foreignKeys && db.open) db.pragma('foreign_keys = ON');
      }
      request.onPhase?.('committed');
      return committed;
    } catch (error) {
      if (error instanceof RejectImport) return reject();
      throw error;
    }
  } finally {
    // The connection may have been closed meanwhile (shutdown); its temp tables went with it.
    if (db.open) db.exec(`DROP TABLE IF EXISTS ${stage}; DROP TABLE IF EXISTS ${held};`);
  }
}

/** True when none of `names` (index 0 unused) is stored for the panel yet. */
function allNew(db: Database, table: 'attribute' | 'assessor' | 'product', column: 'name' | 'code', panelId: number, names: readonly string[]): boolean {
  const find = db.prepare(`SELECT 1 FROM ${table} WHERE panel_id = ? AND ${column} = ?`);
  for (let i = 1; i < names.length; i++) if (find.get(panelId, names[i]) !== undefined) return false;
  return true;
}

/** The largest id of a table (0 when empty): ids above it are free while the write lock is held. */
function maxId(db: Database, table: 'attribute' | 'assessor' | 'product' | 'session'): number {
  return (db.prepare(`SELECT coalesce(max(id), 0) AS id FROM ${table}`).get() as { id: number }).id;
}

function successMessage(fileName: string, panel: string, outcome: ImportOutcome, counts: ImportCounts): string {
  if (outcome === 'unchanged' && counts.sessions === 0) {
    return `${fileName} holds no ratings (${plural(counts.missingCells, 'empty cell')}); nothing was stored.`;
  }
  if (outcome === 'unchanged') {
    return `All ${plural(counts.sessions, 'session')} in ${fileName} are already stored in panel "${panel}" with identical ratings; nothing changed.`;
  }
  const parts = [`${counts.sessionsNew} new`, `${counts.sessionsReplaced} replaced`, `${counts.sessionsUnchanged} unchanged`].join(', ');
  const held = counts.quarantined > 0 ? `; ${plural(counts.quarantined, 'cell')} held in quarantine for correction` : '';
  const corrected = counts.valuesReplaced > 0 ? `; ${plural(counts.valuesReplaced, 'earlier value')} kept in the correction history` : '';
  return `Imported ${plural(counts.ratings, 'rating')} in ${plural(counts.sessions, 'session')} (${parts}) from ${fileName} into panel "${panel}"${corrected}${held}.`;
}

interface WriteContext {
  request: ImportEventsRequest & { sha256: string };
  nowIso: string;
  stage: string;
  held: string;
  sessions: LevelCoder<string>;
  attributes: LevelCoder<string>;
  assessors: LevelCoder<string>;
  products: LevelCoder<string>;
  /** Column headers and sample codes by the ids staged in `col` and `code`. */
  columns: LevelCoder<string>;
  codes: LevelCoder<string>;
  sessionInfo: SessionInFile[];
  scaleOf: Map<number, ScaleRange>;
  counts: ImportCounts;
  addProblem: (problem: InputProblem) => void;
  settings: PanelConfigFile | undefined;
  errorsSoFar: () => number;
}

/** The write phase; runs inside one IMMEDIATE transaction (throws RejectImport to roll back). */
function writeImport(db: Database, ctx: WriteContext): { importId: number; changedSessions: string[] } {
  const { request, nowIso, stage, held, sessions, attributes, assessors, products, columns, codes, sessionInfo, counts } = ctx;
  const panelId = ensurePanel(db, request.panel, nowIso);

  // Session dates against the store (inside the write lock, so no other import can race).
  const storedSession = db.prepare('SELECT id, session_date AS date, data_version AS dataVersion FROM session WHERE panel_id = ? AND label = ?');
  const storedOf: ({ id: number; date: string; dataVersion: number } | undefined)[] = [undefined];
  for (let s = 1; s < sessions.names.length; s++) {
    const label = sessions.names[s];
    const found = storedSession.get(panelId, label) as { id: number; date: string; dataVersion: number } | undefined;
    storedOf.push(found);
    const info = sessionInfo[s];
    if (found && !info.dateConflict && found.date !== info.date) {
      info.dateConflict = true;
      ctx.addProblem({
        code: 'session-date-conflict',
        file: request.fileName,
        row: info.firstRow,
        column: 'date',
        message: `Session "${label}" is dated ${info.date} here but is stored with date ${found.date}; correct the date, or give the session another label if it is a different session.`,
        value: info.date,
      });
    }
  }
  if (ctx.errorsSoFar() > 0 && !request.quarantine) throw new RejectImport();

  const importInfo = db
    .prepare(`INSERT INTO import (panel_id, file_name, content_sha256, source, started_at, outcome) VALUES (?, ?, ?, ?, ?, 'imported')`)
    .run(panelId, request.fileName, request.sha256, request.source, nowIso);
  const importId = Number(importInfo.lastInsertRowid);

  // Names → store ids, via small temp maps the bulk statements can join.
  // One table per kind, keyed by rowid: the cheapest lookup for the bulk statements.
  const KIND_ATTRIBUTE = 0;
  const KIND_ASSESSOR = 1;
  const KIND_PRODUCT = 2;
  const KIND_SESSION = 3;
  const dimTables = ['attribute', 'assessor', 'product', 'session'].map((kind) => `${stage}_${kind}`);
  const [dimAttribute, dimAssessor, dimProduct, dimSession] = dimTables;
  for (const table of dimTables) db.exec(`CREATE TABLE ${table} (idx INTEGER PRIMARY KEY, db_id INTEGER NOT NULL)`);
  // Sample codes and column headers as staged ids → text (code id 0, "no code", has no row: NULL).
  const textTables = ['code', 'col'].map((kind) => `${stage}_${kind}`);
  const [dimCode, dimColumn] = textTables;
  for (const table of textTables) db.exec(`CREATE TABLE ${table} (idx INTEGER PRIMARY KEY, text TEXT NOT NULL)`);
  try {
    for (const [table, list] of [[dimCode, codes], [dimColumn, columns]] as const) {
      const put = db.prepare(`INSERT INTO ${table} (idx, text) VALUES (?, ?)`);
      for (let id = 1; id < list.names.length; id++) put.run(id, list.names[id]);
    }
    const putDimStatements = dimTables.map((table) => db.prepare(`INSERT INTO ${table} (idx, db_id) VALUES (?, ?)`));
    const putDim = (kind: number, idx: number, dbId: number): void => {
      putDimStatements[kind].run(idx, dbId);
    };

    // When every name of a kind is new to the panel, its rows get the ids `offset + staged id`
    // (chosen here, under the write lock), so the bulk insert below computes them instead of
    // joining a map table per rating (about a fifth of its time for a first, large import).
    const offsets = {
      attribute: allNew(db, 'attribute', 'name', panelId, attributes.names) ? maxId(db, 'attribute') : null,
      assessor: allNew(db, 'assessor', 'code', panelId, assessors.names) ? maxId(db, 'assessor') : null,
      product: allNew(db, 'product', 'code', panelId, products.names) ? maxId(db, 'product') : null,
      session: storedOf.every((stored) => stored === undefined) ? maxId(db, 'session') : null,
    };
    /** The id to insert for staged id `idx` (null: SQLite picks one). */
    const chosenId = (offset: number | null, idx: number | undefined): number | null => (offset === null || idx === undefined ? null : offset + idx);
    const upsertAttribute = db.prepare(
      `INSERT INTO attribute (id, panel_id, name, scale_min, scale_max, anchor_low, anchor_high) VALUES (?, ?, ?, ?, ?, ?, ?)
       ON CONFLICT (panel_id, name) DO UPDATE SET anchor_low = coalesce(excluded.anchor_low, anchor_low), anchor_high = coalesce(excluded.anchor_high, anchor_high)
       RETURNING id`,
    );
    for (let id = 1; id < attributes.names.length; id++) {
      const name = attributes.names[id];
      const scale = ctx.scaleOf.get(id) as ScaleRange;
      const own = ctx.settings?.attributes?.[name];
      const row = upsertAttribute.get(chosenId(offsets.attribute, id), panelId, name, scale.min, scale.max, own?.anchorLow ?? null, own?.anchorHigh ?? null) as { id: number };
      putDim(KIND_ATTRIBUTE, id, row.id);
    }
    const upsertAssessor = db.prepare(
      `INSERT INTO assessor (id, panel_id, code) VALUES (?, ?, ?) ON CONFLICT (panel_id, code) DO UPDATE SET code = excluded.code RETURNING id`,
    );
    for (let id = 1; id < assessors.names.length; id++) {
      putDim(KIND_ASSESSOR, id, (upsertAssessor.get(chosenId(offsets.assessor, id), panelId, assessors.names[id]) as { id: number }).id);
    }
    const upsertProduct = db.prepare(
      `INSERT INTO product (id, panel_id, code, display_name, role) VALUES (?, ?, ?, ?, coalesce(?, 'test'))
       ON CONFLICT (panel_id, code) DO UPDATE SET display_name = coalesce(excluded.display_name, display_name),
         role = coalesce(?, role)
       RETURNING id`,
    );
    const productCodes = new Set(products.names.slice(1));
    for (const code of Object.keys(ctx.settings?.products ?? {})) productCodes.add(code);
    for (const code of productCodes) {
      const own = ctx.settings?.products?.[code];
      // The file's products come first, so a settings-only product's automatic id lies above the chosen ones.
      const idx = products.find(code);
      const row = upsertProduct.get(chosenId(offsets.product, idx), panelId, code, own?.name ?? null, own?.role ?? null, own?.role ?? null) as { id: number };
      if (idx !== undefined) putDim(KIND_PRODUCT, idx, row.id);
    }

    // Quarantine: cells the reader rejected, conflicting duplicates, and every cell of a
    // session whose date is in conflict (it cannot be stored under one date).
    const insertQuarantine = db.prepare(
      `INSERT INTO quarantine (import_id, panel_id, file_name, row_number, column_name, session_label, session_date, assessor, product,
         replicate, attribute, raw_value, sample_code, reason_code, reason)
       SELECT ?, ?, ?, row, col, session, date, assessor, product, replicate, attribute, raw_value, code, reason_code, reason FROM ${held} ORDER BY row, col`,
    );
    if (request.quarantine) {
      counts.quarantined += insertQuarantine.run(importId, panelId, request.fileName).changes;
      const quarantineStaged = db.prepare(
        `INSERT INTO quarantine (import_id, panel_id, file_name, row_number, column_name, session_label, session_date, assessor, product,
           replicate, attribute, raw_value, sample_code, reason_code, reason)
         SELECT ?, ?, ?, st.row, dcol.text, ?, ?, ass.code, pr.code, st.rep, at.name, st.value, dc.text, ?, ?
         FROM ${stage} st
         JOIN ${dimAssessor} da ON da.idx = st.assessor JOIN assessor ass ON ass.id = da.db_id
         JOIN ${dimProduct} dp ON dp.idx = st.product JOIN product pr ON pr.id = dp.db_id
         JOIN ${dimAttribute} dt ON dt.idx = st.attr JOIN attribute at ON at.id = dt.db_id
         JOIN ${dimColumn} dcol ON dcol.idx = st.col
         LEFT JOIN ${dimCode} dc ON dc.idx = st.code
         WHERE st.s = ? AND (? OR st.conflicted = 1) ORDER BY st.row, dcol.text`,
      );
      for (let s = 1; s < sessions.names.length; s++) {
        const info = sessionInfo[s];
        const label = sessions.names[s];
        if (info.dateConflict) {
          const stored = storedOf[s];
          const reason = stored
            ? `Session "${label}" is stored with date ${stored.date}; this file gives ${info.date}.`
            : `Session "${label}" has more than one date in this file.`;
          counts.quarantined += quarantineStaged.run(importId, panelId, request.fileName, label, info.date, 'session-date-conflict', reason, s, 1).changes;
          db.prepare(`DELETE FROM ${stage} WHERE s = ?`).run(s);
        }
      }
      // Conflicting duplicates: the first-seen copy joins the later copies already held.
      const conflictReason = 'Another row gives a different value for the same session, assessor, product, replicate and attribute.';
      for (let s = 1; s < sessions.names.length; s++) {
        if (sessionInfo[s].dateConflict) continue;
        counts.quarantined += quarantineStaged.run(importId, panelId, request.fileName, sessions.names[s], sessionInfo[s].date, 'conflicting-duplicate', conflictReason, s, 0).changes;
      }
      db.exec(`DELETE FROM ${stage} WHERE conflicted = 1`);
    }

    // Sessions: new → insert; same content → unchanged; changed → replace with corrections kept.
    const insertSession = db.prepare('INSERT INTO session (id, panel_id, label, session_date, import_id) VALUES (?, ?, ?, ?, ?) RETURNING id');
    const bumpSession = db.prepare('UPDATE session SET data_version = data_version + 1, import_id = ? WHERE id = ?');
    const stagedCount = db.prepare(`SELECT count(*) AS n FROM ${stage} WHERE s = ?`);
    const storedCount = db.prepare('SELECT count(*) AS n FROM rating WHERE session_id = ?');
    const sameCount = db.prepare(
      `SELECT count(*) AS n FROM ${stage} st
       JOIN ${dimAttribute} dt ON dt.idx = st.attr
       JOIN ${dimAssessor} da ON da.idx = st.assessor
       JOIN ${dimProduct} dp ON dp.idx = st.product
       JOIN rating r ON r.session_id = ? AND r.attribute_id = dt.db_id AND r.assessor_id = da.db_id AND r.product_id = dp.db_id AND r.replicate = st.rep
       LEFT JOIN ${dimCode} dc ON dc.idx = st.code
       WHERE st.s = ? AND r.value = st.value AND r.sample_code IS dc.text`,
    );
    const recordCorrections = db.prepare(
      `INSERT INTO rating_correction (session_id, assessor_id, product_id, attribute_id, replicate, old_value, old_sample_code, old_import_id,
         new_value, replaced_by_import_id, corrected_at)
       SELECT r.session_id, r.assessor_id, r.product_id, r.attribute_id, r.replicate, r.value, r.sample_code, r.import_id, n.value, ?, ?
       FROM rating r
       LEFT JOIN (
         SELECT dt.db_id AS attribute_id, da.db_id AS assessor_id, dp.db_id AS product_id, st.rep, st.value, dc.text AS code
         FROM ${stage} st
         JOIN ${dimAttribute} dt ON dt.idx = st.attr
         JOIN ${dimAssessor} da ON da.idx = st.assessor
         JOIN ${dimProduct} dp ON dp.idx = st.product
         LEFT JOIN ${dimCode} dc ON dc.idx = st.code
         WHERE st.s = ?
       ) n ON n.attribute_id = r.attribute_id AND n.assessor_id = r.assessor_id AND n.product_id = r.product_id AND n.rep = r.replicate
       WHERE r.session_id = ? AND (n.value IS NULL OR n.value <> r.value OR n.code IS NOT r.sample_code)`,
    );
    const deleteRatings = db.prepare('DELETE FROM rating WHERE session_id = ?');
    const changedSessions: string[] = [];
    for (let s = 1; s < sessions.names.length; s++) {
      const info = sessionInfo[s];
      if (info.dateConflict) continue; // quarantined above
      const label = sessions.names[s];
      const stored = storedOf[s];
      const nStaged = (stagedCount.get(s) as { n: number }).n;
      if (!stored) {
        if (nStaged === 0) continue; // every cell of it is in quarantine
        const row = insertSession.get(chosenId(offsets.session, s), panelId, label, info.date, importId) as { id: number };
        putDim(KIND_SESSION, s, row.id);
        counts.sessionsNew += 1;
        changedSessions.push(label);
        continue;
      }
      if (nStaged === 0) continue; // every cell of it is in quarantine: leave the stored version alone
      const nStored = (storedCount.get(stored.id) as { n: number }).n;
      if (nStaged === nStored && (sameCount.get(stored.id, s) as { n: number }).n === nStaged) {
        counts.sessionsUnchanged += 1;
        continue;
      }
      counts.valuesReplaced += recordCorrections.run(importId, nowIso, s, stored.id).changes;
      deleteRatings.run(stored.id);
      bumpSession.run(importId, stored.id);
      putDim(KIND_SESSION, s, stored.id);
      counts.sessionsReplaced += 1;
      changedSessions.push(label);
    }

    // Bulk insert in staging-key order (sorting it first into rating's index order was measured: no faster).
    // Ids by offset where all of a kind are new, else through the kind's map table.
    const dims = [
      { offset: offsets.session, column: 'st.s', table: dimSession },
      { offset: offsets.assessor, column: 'st.assessor', table: dimAssessor },
      { offset: offsets.product, column: 'st.product', table: dimProduct },
      { offset: offsets.attribute, column: 'st.attr', table: dimAttribute },
    ];
    const idExpressions = dims.map((d, i) => (d.offset === null ? `d${i}.db_id` : `${d.column} + ${Math.trunc(d.offset)}`));
    const joins = dims.flatMap((d, i) => (d.offset === null ? [`JOIN ${d.table} d${i} ON d${i}.idx = ${d.column}`] : []));
    db.prepare(
      `INSERT INTO rating (session_id, assessor_id, product_id, attribute_id, replicate, value, sample_code, import_id)
       SELECT ${idExpressions.join(', ')}, st.rep, st.value, dc.text, ?
       FROM ${stage} st
       ${joins.join('\n       ')}
       LEFT JOIN ${dimCode} dc ON dc.idx = st.code`,
    ).run(importId);
    // Quarantined cells are not ratings of this import.
    if (request.quarantine) counts.ratings = (db.prepare(`SELECT count(*) AS n FROM ${stage}`).get() as { n: number }).n;

    db.prepare(
      `UPDATE import SET finished_at = ?, n_rows = ?, n_ratings = ?, n_sessions = ?, n_replaced = ?, n_quarantined = ?, n_errors = ? WHERE id = ?`,
    ).run(nowIso, counts.rows, counts.ratings, counts.sessions, counts.valuesReplaced, counts.quarantined, ctx.errorsSoFar(), importId);
    return { importId, changedSessions };
  } finally {
    for (const table of [...dimTables, ...textTables]) db.exec(`DROP TABLE IF EXISTS ${table}`);
  }
}
