/**
 * The messages between the refit orchestration (main thread) and the fit workers. Everything
 * here is structured-clone safe (plain objects, arrays, numbers, strings, null).
 */
import type { FitJson } from '../../domain/analysis.js';
import type { Flag } from '../../domain/flags.js';
import type { Observation, ScaleRange } from '../../domain/ratings.js';
import type { AssessorSessionIndices } from '../../analysis/indices/types.js';

export type RatedObservation = Observation & { code: string | null };

/** Fit, indices and quality findings of one session (all its attributes). */
export interface SessionTask {
  type: 'session';
  session: string;
  sessionDate: string;
  attributes: { attribute: string; scale: ScaleRange; observations: RatedObservation[] }[];
  /** Products with role 'reference' (the blind control). */
  referenceProducts: string[];
}

export interface AttributeOutcome {
  attribute: string;
  /** null when no model could be fitted (the reason is in `problem`). */
  fit: FitJson | null;
  diagnostics: unknown;
  indices: AssessorSessionIndices[];
  /** A plain sentence when the attribute could not be analysed this session. */
  problem: string | null;
}

export interface SessionTaskResult {
  session: string;
  attributes: AttributeOutcome[];
  findings: unknown[];
}

/** The period model of one attribute over a window of sessions (with the product:session LRT). */
export interface PeriodTask {
  type: 'period';
  attribute: string;
  scale: ScaleRange;
  /** Labels of the window's sessions in time order. */
  sessions: string[];
  observations: RatedObservation[];
}

export interface PeriodTaskResult {
  attribute: string;
  /** The period fit as analysis/ returns it, or null with a problem sentence. */
  result: unknown;
  problem: string | null;
}

/** Everything stored about a panel that the flag engine reads (built by server/refit.ts). */
export interface PanelSnapshot {
  panel: string;
  sessions: { label: string; date: string; dataVersion: number }[];
  attributes: { name: string; scale: ScaleRange }[];
  referenceProducts: string[];
  fits: FitJson[];
  indices: AssessorSessionIndices[];
  quality: { session: string; findings: unknown[] }[];
  periodFits: { attribute: string; firstSession: string; lastSession: string; sessions: string[]; result: unknown }[];
  events: { kind: 'retraining' | 'control-batch' | 'note'; session: string; assessor: string | null }[];
}

export interface FlagsTask {
  type: 'flags';
  snapshot: PanelSnapshot;
  /** The panel's thresholds (validated), or null for the defaults. */
  thresholds: unknown;
}

export interface FlagsTaskResult {
  flags: Flag[];
}

export type FitTask = SessionTask | PeriodTask | FlagsTask;

export type FitTaskResult<T extends FitTask> = T extends SessionTask
  ? SessionTaskResult
  : T extends PeriodTask
    ? PeriodTaskResult
    : T extends FlagsTask
      ? FlagsTaskResult
      : never;
