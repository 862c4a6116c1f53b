/**
 * Write: one IMMEDIATE transaction, synchronous, so a crash at any moment leaves all of it or
 * none of it (WAL), and no other request on the shared connection can interleave. Inside it:
 * the panel, the session dates against the store (decide.ts), the import row, the names
 * (attributes, assessors, products), quarantine, the sessions (new, unchanged, or replaced with
 * the corrections kept), then every staged rating in one bulk insert.
 */
import type { Database, Statement } from 'better-sqlite3';
import type { ImportCounts, ImportOutcome } from '../../domain/imports.js';
import type { ScaleRange } from '../../domain/ratings.js';
import { decideStoredSessions, type StoredSession } from './decide.js';
import { ensurePanel } from './log.js';
import type { SessionInFile, StagedNames, StagingTables } from './stage.js';
import { plural, type ImportTally } from './tally.js';
import type { ImportReport, ResolvedRequest } from './types.js';

/** Thrown inside the write transaction to roll it back with the problems found there. */
export class RejectImport extends Error {}

export interface WriteContext {
  request: ResolvedRequest;
  nowIso: string;
  tables: StagingTables;
  names: StagedNames;
  sessionInfo: SessionInFile[];
  scaleOf: Map<number, ScaleRange>;
  tally: ImportTally;
}

/** Names → store ids, via small temp maps the bulk statements can join (one table per kind, keyed by rowid). */
interface DimTables {
  attribute: string;
  assessor: string;
  product: string;
  session: string;
  /** Sample codes and column headers as staged ids → text (code id 0, "no code", has no row: NULL). */
  code: string;
  column: string;
}

/**
 * Per kind, when every name of it is new to the panel: the offset its rows' ids get
 * (`offset + staged id`), else null (SQLite picks the ids).
 */
interface IdOffsets {
  attribute: number | null;
  assessor: number | null;
  product: number | null;
  session: number | null;
}

/** What the steps inside the transaction share. */
interface WriteStep {
  db: Database;
  ctx: WriteContext;
  panelId: number;
  importId: number;
  dims: DimTables;
  offsets: IdOffsets;
  storedOf: (StoredSession | undefined)[];
}

/**
 * Runs the write transaction and logs the import with its report. Throws RejectImport when the
 * store's session dates add problems that reject the import (nothing is then written).
 */
export function commitImport(db: Database, ctx: WriteContext): ImportReport {
  const { request, tally } = ctx;
  const { counts } = tally;
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
        const written = writeImport(db, ctx);
        const outcome: ImportOutcome =
          counts.quarantined > 0 ? 'quarantined' : counts.sessionsNew + counts.sessionsReplaced > 0 ? 'imported' : 'unchanged';
        const report: ImportReport = {
          ok: true,
          outcome,
          importId: written.importId,
          panel: request.panel,
          fileName: request.fileName,
          sha256: request.sha256,
          counts,
          changedSessions: written.changedSessions,
          findings: tally.findings,
          errors: tally.errors,
          totalErrors: tally.totalErrors,
          message: successMessage(request.fileName, request.panel, outcome, counts),
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
}

/** The write phase; runs inside one IMMEDIATE transaction (throws RejectImport to roll back). */
function writeImport(db: Database, ctx: WriteContext): { importId: number; changedSessions: string[] } {
  const { request, nowIso, names, tally } = ctx;
  const panelId = ensurePanel(db, request.panel, nowIso);
  const storedOf = decideStoredSessions(db, panelId, names.sessions, ctx.sessionInfo, tally, request.fileName);
  if (tally.totalErrors > 0 && !request.quarantine) throw new RejectImport();

  const importInfo = db
    .prepare(`INSERT INTO import (panel_id, file_name, content_sha256, source, started_at, outcome) VALUES (?, ?, ?, ?, ?, 'imported')`)
    .run(panelId, request.fileName, request.sha256, request.source, nowIso);
  const importId = Number(importInfo.lastInsertRowid);

  const dims = createDimTables(db, ctx.tables.stage);
  try {
    fillTextTables(db, dims, names);
    // When every name of a kind is new to the panel, its rows get the ids `offset + staged id`
    // (chosen here, under the write lock), so the bulk insert below computes them instead of
    // joining a map table per rating (about a fifth of its time for a first, large import).
    const offsets: IdOffsets = {
      attribute: allNew(db, 'attribute', 'name', panelId, names.attributes.names) ? maxId(db, 'attribute') : null,
      assessor: allNew(db, 'assessor', 'code', panelId, names.assessors.names) ? maxId(db, 'assessor') : null,
      product: allNew(db, 'product', 'code', panelId, names.products.names) ? maxId(db, 'product') : null,
      session: storedOf.every((stored) => stored === undefined) ? maxId(db, 'session') : null,
    };
    const step: WriteStep = { db, ctx, panelId, importId, dims, offsets, storedOf };
    writeNames(step);
    if (request.quarantine) writeQuarantine(step);
    const changedSessions = writeSessions(step);
    insertRatings(step);
    // Quarantined cells are not ratings of this import.
    const { counts } = tally;
    if (request.quarantine) counts.ratings = (db.prepare(`SELECT count(*) AS n FROM ${ctx.tables.stage}`).get() as { n: number }).n;

    db.prepare(
      `UPDATE import SET finished_at = ?, n_rows = ?, n_ratings = ?, n_sessions = ?, n_replaced = ?, n_quarantined = ?, n_errors = ? WHERE id = ?`,
    ).run(nowIso, counts.rows, counts.ratings, counts.sessions, counts.valuesReplaced, counts.quarantined, tally.totalErrors, importId);
    return { importId, changedSessions };
  } finally {
    for (const table of Object.values(dims)) db.exec(`DROP TABLE IF EXISTS ${table}`);
  }
}

function createDimTables(db: Database, stage: string): DimTables {
  const dims: DimTables = {
    attribute: `${stage}_attribute`,
    assessor: `${stage}_assessor`,
    product: `${stage}_product`,
    session: `${stage}_session`,
    code: `${stage}_code`,
    column: `${stage}_col`,
  };
  for (const table of [dims.attribute, dims.assessor, dims.product, dims.session]) db.exec(`CREATE TABLE ${table} (idx INTEGER PRIMARY KEY, db_id INTEGER NOT NULL)`);
  for (const table of [dims.code, dims.column]) db.exec(`CREATE TABLE ${table} (idx INTEGER PRIMARY KEY, text TEXT NOT NULL)`);
  return dims;
}

function fillTextTables(db: Database, dims: DimTables, names: StagedNames): void {
  for (const [table, list] of [[dims.code, names.codes], [dims.column, names.columns]] as const) {
    const put = db.prepare(`INSERT INTO ${table} (idx, text) VALUES (?, ?)`);
    for (let id = 1; id < list.names.length; id++) put.run(id, list.names[id]);
  }
}

function putDimStatement(db: Database, table: string): Statement {
  return db.prepare(`INSERT INTO ${table} (idx, db_id) VALUES (?, ?)`);
}

/** The id to insert for staged id `idx` (null: SQLite picks one). */
function chosenId(offset: number | null, idx: number | undefined): number | null {
  return offset === null || idx === undefined ? null : offset + idx;
}

/** Attributes, assessors and products: inserted when new, anchors and product names updated from the settings. */
function writeNames({ db, ctx, panelId, dims, offsets }: WriteStep): void {
  const { attributes, assessors, products } = ctx.names;
  const settings = ctx.request.settings;
  const upsertAttribute = db.prepare(
    `INSERT INTO attribute (id, panel_id, name, scale_min, scale_max, anchor_low, anchor_high) VALUES (?, ?, ?, ?, ?, ?, ?)
     ON CONFLICT (panel_id, name) DO UPDATE SET anchor_low = coalesce(excluded.anchor_low, anchor_low), anchor_high = coalesce(excluded.anchor_high, anchor_high)
     RETURNING id`,
  );
  const putAttribute = putDimStatement(db, dims.attribute);
  for (let id = 1; id < attributes.names.length; id++) {
    const name = attributes.names[id];
    const scale = ctx.scaleOf.get(id) as ScaleRange;
    const own = settings?.attributes?.[name];
    const row = upsertAttribute.get(chosenId(offsets.attribute, id), panelId, name, scale.min, scale.max, own?.anchorLow ?? null, own?.anchorHigh ?? null) as { id: number };
    putAttribute.run(id, row.id);
  }
  const upsertAssessor = db.prepare(
    `INSERT INTO assessor (id, panel_id, code) VALUES (?, ?, ?) ON CONFLICT (panel_id, code) DO UPDATE SET code = excluded.code RETURNING id`,
  );
  const putAssessor = putDimStatement(db, dims.assessor);
  for (let id = 1; id < assessors.names.length; id++) {
    putAssessor.run(id, (upsertAssessor.get(chosenId(offsets.assessor, id), panelId, assessors.names[id]) as { id: number }).id);
  }
  const upsertProduct = db.prepare(
    `INSERT INTO product (id, panel_id, code, display_name, role) VALUES (?, ?, ?, ?, coalesce(?, 'test'))
     ON CONFLICT (panel_id, code) DO UPDATE SET display_name = coalesce(excluded.display_name, display_name),
       role = coalesce(?, role)
     RETURNING id`,
  );
  const putProduct = putDimStatement(db, dims.product);
  const productCodes = new Set(products.names.slice(1));
  for (const code of Object.keys(settings?.products ?? {})) productCodes.add(code);
  for (const code of productCodes) {
    const own = settings?.products?.[code];
    // The file's products come first, so a settings-only product's automatic id lies above the chosen ones.
    const idx = products.find(code);
    const row = upsertProduct.get(chosenId(offsets.product, idx), panelId, code, own?.name ?? null, own?.role ?? null, own?.role ?? null) as { id: number };
    if (idx !== undefined) putProduct.run(idx, row.id);
  }
}

/**
 * Quarantine: cells the reader rejected, conflicting duplicates, and every cell of a session
 * whose date is in conflict (it cannot be stored under one date). Removes them from staging.
 */
function writeQuarantine({ db, ctx, panelId, importId, dims, storedOf }: WriteStep): void {
  const { request, sessionInfo } = ctx;
  const { stage, held } = ctx.tables;
  const { sessions } = ctx.names;
  const { counts } = ctx.tally;
  const insertQuarantine = db.prepare(
    `INSERT INTO quarantine (import_id, panel_id, file_name, row_number, column_name, session_label, session_date, assessor, product,
       replicate, attribute, raw_value, sample_code, reason_code, reason)
     SELECT ?, ?, ?, row, col, session, date, assessor, product, replicate, attribute, raw_value, code, reason_code, reason FROM ${held} ORDER BY row, col`,
  );
  counts.quarantined += insertQuarantine.run(importId, panelId, request.fileName).changes;
  const quarantineStaged = db.prepare(
    `INSERT INTO quarantine (import_id, panel_id, file_name, row_number, column_name, session_label, session_date, assessor, product,
       replicate, attribute, raw_value, sample_code, reason_code, reason)
     SELECT ?, ?, ?, st.row, dcol.text, ?, ?, ass.code, pr.code, st.rep, at.name, st.value, dc.text, ?, ?
     FROM ${stage} st
     JOIN ${dims.assessor} da ON da.idx = st.assessor JOIN assessor ass ON ass.id = da.db_id
     JOIN ${dims.product} dp ON dp.idx = st.product JOIN product pr ON pr.id = dp.db_id
     JOIN ${dims.attribute} dt ON dt.idx = st.attr JOIN attribute at ON at.id = dt.db_id
     JOIN ${dims.column} dcol ON dcol.idx = st.col
     LEFT JOIN ${dims.code} dc ON dc.idx = st.code
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

/** Sessions: new → insert; same content → unchanged; changed → replace with corrections kept. Returns the labels added or replaced. */
function writeSessions({ db, ctx, panelId, importId, dims, offsets, storedOf }: WriteStep): string[] {
  const { nowIso, sessionInfo } = ctx;
  const { stage } = ctx.tables;
  const { sessions } = ctx.names;
  const { counts } = ctx.tally;
  const putSession = putDimStatement(db, dims.session);
  const insertSession = db.prepare('INSERT INTO session (id, panel_id, label, session_date, import_id) VALUES (?, ?, ?, ?, ?) RETURNING id');
  const bumpSession = db.prepare('UPDATE session SET data_version = data_version + 1, import_id = ? WHERE id = ?');
  const stagedCount = db.prepare(`SELECT count(*) AS n FROM ${stage} WHERE s = ?`);
  const storedCount = db.prepare('SELECT count(*) AS n FROM rating WHERE session_id = ?');
  const sameCount = db.prepare(
    `SELECT count(*) AS n FROM ${stage} st
     JOIN ${dims.attribute} dt ON dt.idx = st.attr
     JOIN ${dims.assessor} da ON da.idx = st.assessor
     JOIN ${dims.product} dp ON dp.idx = st.product
     JOIN rating r ON r.session_id = ? AND r.attribute_id = dt.db_id AND r.assessor_id = da.db_id AND r.product_id = dp.db_id AND r.replicate = st.rep
     LEFT JOIN ${dims.code} dc ON dc.idx = st.code
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
       JOIN ${dims.attribute} dt ON dt.idx = st.attr
       JOIN ${dims.assessor} da ON da.idx = st.assessor
       JOIN ${dims.product} dp ON dp.idx = st.product
       LEFT JOIN ${dims.code} dc ON dc.idx = st.code
       WHERE st.s = ?
     ) n ON n.attribute_id = r.attribute_id AND n.assessor_id = r.assessor_id AND n.product_id = r.product_id AND n.rep = r.replicate
     WHERE r.session_id = ? AND (n.value IS NULL OR n.value <> r.value OR n.code IS NOT r.sample_code)`,
  );
  const deleteRatings = db.prepare('DELETE FROM rating WHERE session_id = ?');
  const changedSessions: string[] = [];
  for (let s = 1; s < sessions.names.length; s++) {
    const info = sessionInfo[s];
    if (info.dateConflict) continue; // quarantined
    const label = sessions.names[s];
    const stored = storedOf[s];
    const nStaged = (stagedCount.get(s) as { n: number }).n;
    if (!stored) {
      if (nStaged === 0) continue; // every cell of it is in quarantine
      const row = insertSession.get(chosenId(offsets.session, s), panelId, label, info.date, importId) as { id: number };
      putSession.run(s, row.id);
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
    putSession.run(s, stored.id);
    counts.sessionsReplaced += 1;
    changedSessions.push(label);
  }
  return changedSessions;
}

/**
 * Bulk insert in staging-key order (sorting it first into rating's index order was measured: no faster).
 * Ids by offset where all of a kind are new, else through the kind's map table.
 */
function insertRatings({ db, ctx, importId, dims, offsets }: WriteStep): void {
  const byKind = [
    { offset: offsets.session, column: 'st.s', table: dims.session },
    { offset: offsets.assessor, column: 'st.assessor', table: dims.assessor },
    { offset: offsets.product, column: 'st.product', table: dims.product },
    { offset: offsets.attribute, column: 'st.attr', table: dims.attribute },
  ];
  const idExpressions = byKind.map((d, i) => (d.offset === null ? `d${i}.db_id` : `${d.column} + ${Math.trunc(d.offset)}`));
  const joins = byKind.flatMap((d, i) => (d.offset === null ? [`JOIN ${d.table} d${i} ON d${i}.idx = ${d.column}`] : []));
  db.prepare(
    `INSERT INTO rating (session_id, assessor_id, product_id, attribute_id, replicate, value, sample_code, import_id)
     SELECT ${idExpressions.join(', ')}, st.rep, st.value, dc.text, ?
     FROM ${ctx.tables.stage} st
     ${joins.join('\n     ')}
     LEFT JOIN ${dims.code} dc ON dc.idx = st.code`,
  ).run(importId);
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
