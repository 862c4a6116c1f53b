/**
 * The one import path for the CLI, the HTTP API and the web form: hash the content, skip it
 * when the panel already has it, else read and validate the file (ingest/read-ratings.ts) and
 * run the import transaction (import-core.ts).
 *
 * A file of READ_IN_WORKER_BYTES (5 MiB) or more is read and validated on a worker thread
 * (ingest/read-in-worker.ts) that starts at once, so reading overlaps the hashing and then the
 * staging on this thread (two cores busy instead of one). Smaller files are read on this thread:
 * starting a worker costs more than it saves. Either way the store sees the same compact batches.
 */
import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';
import { stat } from 'node:fs/promises';
import type { Database } from 'better-sqlite3';
import type { InputProblem } from '../domain/problems.js';
import type { ImportSource, ScaleRange } from '../domain/ratings.js';
import { readCompactBatches } from '../ingest/compact-batches.js';
import { readerWorkerIsBuilt, readInWorker, type ScaleLookup, type WorkerReading } from '../ingest/read-in-worker.js';
import type { InputSource } from '../ingest/read-ratings.js';
import {
  findEarlierImport,
  importRatingBatches,
  importRatingEvents,
  scaleForNewAttribute,
  storedScales,
  unchangedReport,
  type ImportPhase,
  type ImportReport,
} from './import-core.js';
import type { PanelConfigFile } from './panel-config.js';

export type { ImportCounts, ImportOutcome, ImportPhase, ImportReport } from './import-core.js';
export type { InputSource } from '../ingest/read-ratings.js';

export interface ImportRequest {
  /** Panel name; the panel is created by its first import. */
  panel: string;
  /** The name the user gave the file (used in every problem; never a path). */
  fileName: string;
  source: ImportSource;
  input: InputSource;
  /** Scale for attributes new to the panel (--scale, or the upload form's scale fields). */
  scale?: ScaleRange;
  /** Store the valid rows and hold invalid cells, instead of all or nothing. */
  quarantine: boolean;
  /** .xlsx worksheet (default: the first). */
  sheet?: string;
  /** Panel settings file: scales, anchors, product roles. */
  settings?: PanelConfigFile;
  now?: () => Date;
  /** Progress: the file has been read and validated ('writing'), the import is stored ('committed'). */
  onPhase?: (phase: ImportPhase) => void;
  /**
   * Where the file is read. 'auto' (default): on a worker thread for files of READ_IN_WORKER_BYTES
   * or more when running the build (from the .ts sources, as in tests, a worker first loads the
   * TypeScript loader, about 0.8 s, so 'auto' reads on this thread there).
   */
  reader?: 'auto' | 'worker' | 'in-thread';
}

/**
 * Files at least this large (about 100,000 ratings in long form, 700,000 in wide form) are read on
 * a worker thread. Below it, starting the worker (loading the reader's modules on a fresh thread,
 * 0.1–0.3 s measured on this 2-core machine) costs about as much as the overlap saves.
 */
export const READ_IN_WORKER_BYTES = 5 << 20;

async function inputBytes(input: InputSource): Promise<number> {
  if ('bytes' in input) return input.bytes.length;
  try {
    return (await stat(input.path)).size;
  } catch {
    return 0; // unreadable: the hash says so
  }
}

/** An input source for a file on disk. */
export function fileInput(path: string): InputSource {
  return { path };
}

/** SHA-256 (hex) of the input's bytes, read in chunks. */
export async function hashInput(input: InputSource): Promise<string> {
  const hash = createHash('sha256');
  if ('bytes' in input) {
    hash.update(input.bytes);
  } else {
    for await (const chunk of createReadStream(input.path, { highWaterMark: 1 << 20 })) hash.update(chunk as Buffer);
  }
  return hash.digest('hex');
}

/**
 * Imports one file into a panel. Never throws for bad input (problems come back in the
 * report, `ok: false`); throws only for faults of the store itself.
 */
/** Today (UTC) by the request's clock: the reader notes session dates more than a year later. */
function todayOf(request: ImportRequest): string {
  return (request.now ?? (() => new Date()))().toISOString().slice(0, 10);
}

export async function importRatings(db: Database, request: ImportRequest): Promise<ImportReport> {
  // Scales known before reading: the reader checks every value against them. The write
  // phase takes the stored scales again under the write lock.
  const stored = storedScales(db, request.panel);
  const choice = request.reader ?? 'auto';
  const useWorker = choice === 'worker' || (choice === 'auto' && readerWorkerIsBuilt() && (await inputBytes(request.input)) >= READ_IN_WORKER_BYTES);
  let reading: WorkerReading | null = null;
  if (useWorker) {
    const known = new Map<string, ScaleRange>(Object.entries(request.settings?.attributes ?? {}).map(([name, s]) => [name, { min: s.min, max: s.max }]));
    for (const [name, scale] of stored) known.set(name, scale);
    const scales: ScaleLookup = { known: [...known], fallback: request.scale ?? request.settings?.scale ?? null };
    reading = readInWorker(request.input, { fileName: request.fileName, sheet: request.sheet, scales, today: todayOf(request) });
  }
  try {
    return await hashCheckAndImport(db, request, stored, reading);
  } finally {
    // However the import ends (answer, unchanged content, or a fault of the store), the worker ends with it.
    await reading?.stop();
  }
}

/** The part of importRatings after the reader has been started (on a worker, or not yet: `reading` null). */
async function hashCheckAndImport(db: Database, request: ImportRequest, stored: Map<string, ScaleRange>, reading: WorkerReading | null): Promise<ImportReport> {
  let sha256: string;
  try {
    sha256 = await hashInput(request.input);
  } catch {
    // Gone or unreadable: the same answer as for any file that cannot be read (no path shown).
    const problem: InputProblem = { code: 'file-unreadable', file: request.fileName, row: null, column: null, message: 'The file could not be opened for reading.' };
    return importRatingEvents(db, { ...request, sha256: '' }, [{ type: 'problem', problem, cell: null }]);
  }
  const eventsRequest = {
    panel: request.panel,
    fileName: request.fileName,
    source: request.source,
    sha256,
    scale: request.scale,
    quarantine: request.quarantine,
    settings: request.settings,
    now: request.now,
    onPhase: request.onPhase,
  };
  const earlier = findEarlierImport(db, request.panel, sha256);
  if (earlier) return unchangedReport(db, eventsRequest, earlier);
  if (reading !== null) return importRatingBatches(db, eventsRequest, reading.batches);
  const scaleFor = (attribute: string): ScaleRange | null => stored.get(attribute) ?? scaleForNewAttribute(attribute, request.scale, request.settings) ?? null;
  return importRatingBatches(db, eventsRequest, readCompactBatches(request.input, { fileName: request.fileName, sheet: request.sheet, scaleFor, today: todayOf(request) }));
}
