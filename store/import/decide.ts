/**
 * Decide: what the staged file needs from the store before anything is written. Missing scales
 * (stored for known attributes, else from the request), session dates against the stored ones
 * (checked inside the write lock, so no other import can race), and whether the problems found
 * reject the import (the default) or only send the offending cells to quarantine.
 */
import type { Database } from 'better-sqlite3';
import type { ScaleRange } from '../../domain/ratings.js';
import type { PanelConfigFile } from '../panel-config.js';
import type { SessionInFile, StagedNames, StagingTables } from './stage.js';
import { addProblem, type ImportTally } from './tally.js';
import type { ResolvedRequest } from './types.js';

/** A session as the store has it. */
export interface StoredSession {
  id: number;
  date: string;
  dataVersion: number;
}

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

/**
 * The scale of every staged attribute, by staged id; an attribute without one is a problem
 * (named here unless the reader already asked for every attribute's scale).
 */
export function decideScales(
  db: Database,
  tables: StagingTables,
  names: StagedNames,
  request: ResolvedRequest,
  tally: ImportTally,
  readerAskedForScales: boolean,
): Map<number, ScaleRange> {
  const { attributes, columns } = names;
  const stored = storedScales(db, request.panel);
  const scaleOf = new Map<number, ScaleRange>();
  for (let id = 1; id < attributes.names.length; id++) {
    const name = attributes.names[id];
    const scale = stored.get(name) ?? scaleForNewAttribute(name, request.scale, request.settings);
    if (scale) {
      scaleOf.set(id, scale);
      continue;
    }
    tally.unquarantinableErrors += 1;
    if (readerAskedForScales) continue;
    const first = db.prepare(`SELECT min(row) AS row, col FROM ${tables.stage} WHERE attr = ?`).get(id) as { row: number; col: number };
    addProblem(tally, {
      code: 'scale-missing',
      file: request.fileName,
      row: first.row,
      column: columns.names[first.col],
      message: `Attribute "${name}" is new to panel "${request.panel}" and has no scale; give it with --scale MIN:MAX, the scale fields of the upload form, or --settings panel.json.`,
    });
  }
  return scaleOf;
}

/** Problems reject the import unless quarantine was asked for and can hold every one of them. */
export function mustReject(tally: ImportTally, quarantine: boolean): boolean {
  return tally.totalErrors > 0 && (!quarantine || tally.unquarantinableErrors > 0);
}

/**
 * Each staged session as stored (index 0 unused; undefined: new to the panel). A session stored
 * under another date than the file's is a date conflict: a problem, and its cells go to quarantine.
 */
export function decideStoredSessions(
  db: Database,
  panelId: number,
  sessions: StagedNames['sessions'],
  sessionInfo: SessionInFile[],
  tally: ImportTally,
  fileName: string,
): (StoredSession | undefined)[] {
  const storedSession = db.prepare('SELECT id, session_date AS date, data_version AS dataVersion FROM session WHERE panel_id = ? AND label = ?');
  const storedOf: (StoredSession | undefined)[] = [undefined];
  for (let s = 1; s < sessions.names.length; s++) {
    const label = sessions.names[s];
    const found = storedSession.get(panelId, label) as StoredSession | undefined;
    storedOf.push(found);
    const info = sessionInfo[s];
    if (found && !info.dateConflict && found.date !== info.date) {
      info.dateConflict = true;
      addProblem(tally, {
        code: 'session-date-conflict',
        file: fileName,
        row: info.firstRow,
        column: 'date',
        message: `Session "${label}" is dated ${info.date} here but is stored with date ${found.date}; correct the date, or give the session another label if it is a different session.`,
        value: info.date,
      });
    }
  }
  return storedOf;
}
