/**
 * The one import path for the CLI, the HTTP API and the web form: hash the content, skip it
 * when the panel already has it, else read and validate the file (ingest/read-ratings.ts) and
 * run the import transaction (import-core.ts).
 */
import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';
import type { Database } from 'better-sqlite3';
import type { InputProblem } from '../domain/problems.js';
import type { ImportSource, ScaleRange } from '../domain/ratings.js';
import { readRatingBatches, type InputSource } from '../ingest/read-ratings.js';
import { findEarlierImport, importRatingEvents, scaleForNewAttribute, storedScales, unchangedReport, type ImportPhase, type ImportReport } from './import-core.js';
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
export async function importRatings(db: Database, request: ImportRequest): Promise<ImportReport> {
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
  // Scales known before reading: the reader checks every value against them. The write
  // phase takes the stored scales again under the write lock.
  const stored = storedScales(db, request.panel);
  const scaleFor = (attribute: string): ScaleRange | null => stored.get(attribute) ?? scaleForNewAttribute(attribute, request.scale, request.settings) ?? null;
  const events = readRatingBatches(request.input, { fileName: request.fileName, sheet: request.sheet, scaleFor });
  return importRatingEvents(db, eventsRequest, events);
}
