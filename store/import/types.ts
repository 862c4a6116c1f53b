/** The import's request and report shapes, shared by its stages (stage → decide → write). */
import type { ImportCounts, ImportOutcome } from '../../domain/imports.js';
import type { InputFinding, InputProblem } from '../../domain/problems.js';
import type { ImportSource, ScaleRange } from '../../domain/ratings.js';
import type { ReadEvent } from '../../ingest/read-ratings.js';
import type { PanelConfigFile } from '../panel-config.js';

export type { ImportCounts, ImportOutcome } from '../../domain/imports.js';

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

/** The request once the content's hash is known. */
export type ResolvedRequest = Omit<ImportEventsRequest, 'sha256'> & { sha256: string };
