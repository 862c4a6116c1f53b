/**
 * The import transaction, fed by the reader's compact batches (ingest/compact-batches.ts: ratings
 * as typed arrays of name ids, plus problems and findings), in reading order. `importRatings`
 * (import-ratings.ts) wires the file reader to this, on a worker thread for large files; tests
 * may feed read events directly (importRatingEvents encodes them on this thread).
 *
 * The work runs in three stages, each in its own file under import/, passing its state on as
 * typed objects (the staged file and one tally of counts, problems and findings):
 * 1. Stage (stage.ts): stream every rating into a TEMP staging table, finding duplicates as the
 *    rows arrive; nothing of the store is written or locked.
 * 2. Decide (decide.ts): missing scales, session dates against the store; problems → reject
 *    (default) or quarantine the offending cells.
 * 3. Write (write.ts): one IMMEDIATE transaction, synchronous, so a crash at any moment leaves
 *    all of it or none of it (WAL), and no other request on the shared connection can interleave.
 */
import type { Database } from 'better-sqlite3';
import { compactBatches, type CompactBatch } from '../ingest/compact-batches.js';
import { decideScales, mustReject } from './import/decide.js';
import { findEarlierImport, rejectedReport, unchangedReport } from './import/log.js';
import { createStagingTables, dropStagingTables, openStager, stageBatches } from './import/stage.js';
import { newTally } from './import/tally.js';
import type { ImportEvent, ImportEventsRequest, ImportReport } from './import/types.js';
import { commitImport, RejectImport } from './import/write.js';

export type { ImportCounts, ImportEvent, ImportEventsRequest, ImportOutcome, ImportPhase, ImportReport } from './import/types.js';
export { scaleForNewAttribute, storedScales } from './import/decide.js';
export { findEarlierImport, recordAttempt, unchangedReport } from './import/log.js';

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
 * order, e.g. as a worker thread posts them. See the module comment for the stages.
 * Never throws for bad input: problems come back in the report (outcome 'rejected').
 */
export async function importRatingBatches(
  db: Database,
  request: ImportEventsRequest,
  batches: AsyncIterable<CompactBatch> | Iterable<CompactBatch>,
): Promise<ImportReport> {
  const tally = newTally();
  const tables = createStagingTables(db);
  try {
    const stager = openStager(db, tables, tally, request.fileName);
    await stageBatches(stager, batches);
    const { names, sessionInfo, maxRow, readerAskedForScales } = stager.file;

    const resolved = { ...request, sha256: await request.sha256 };
    const earlier = findEarlierImport(db, request.panel, resolved.sha256);
    if (earlier) return unchangedReport(db, resolved, earlier);
    tally.counts.rows = maxRow - 1;
    tally.counts.sessions = names.sessions.names.length - 1;

    const scaleOf = decideScales(db, tables, names, resolved, tally, readerAskedForScales);
    if (mustReject(tally, request.quarantine)) return rejectedReport(db, resolved, tally);

    const nowIso = (request.now ?? (() => new Date()))().toISOString();
    try {
      return commitImport(db, { request: resolved, nowIso, tables, names, sessionInfo, scaleOf, tally });
    } catch (error) {
      if (error instanceof RejectImport) return rejectedReport(db, resolved, tally);
      throw error;
    }
  } finally {
    dropStagingTables(db, tables);
  }
}
