/**
 * The messages between the refit orchestration (main thread) and the fit workers. Everything
 * here is structured-clone safe (plain objects, arrays, numbers, strings, null).
 */
import type { FitJson, PeriodFitResult, SessionFitFinding } from '../../domain/analysis.js';
import type { Flag } from '../../domain/flags.js';
import type { Observation, ScaleRange } from '../../domain/ratings.js';
import type { AssessorSessionIndices } from '../../analysis/indices/types.js';
import type { PanelHistory } from '../../analysis/monitor/series.js';
import type { RetrainingEvaluation } from '../../analysis/flags/index.js';
import type { PackedRatings } from '../../domain/packed-ratings.js';

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

/** An unexpected error of a fit (a fault of the program), for the log. */
export interface FitFailure {
  message: string;
  stack: string | null;
}

export interface AttributeOutcome {
  attribute: string;
  /** null when no model could be fitted (the reason is in `problem`). */
  fit: FitJson | null;
  diagnostics: unknown;
  indices: AssessorSessionIndices[];
  /** A plain sentence when the attribute could not be analysed this session. */
  problem: string | null;
  /** Set when the reason was an unexpected error rather than the data: logged by the main thread. */
  failure: FitFailure | null;
}

export interface SessionTaskResult {
  session: string;
  attributes: AttributeOutcome[];
  findings: SessionFitFinding[];
}

/** The period model of one attribute over a window of sessions (with the product:session LRT). */
export interface PeriodTask {
  type: 'period';
  attribute: string;
  scale: ScaleRange;
  /** Labels of the window's sessions in time order. */
  sessions: string[];
  observations: RatedObservation[];
  /**
   * Warm start: relative SDs by term name from a stored fit of a window like this one (the same
   * window before a change, or the previous latest window). Never changes the answer beyond the
   * optimiser's tolerance; fitPeriodModel ignores it when it is worse than the default start.
   */
  startRelativeSds?: Record<string, number> | null;
  /** The same for the LRT's fit without product:session (that fit's `reducedRelativeSds`). */
  startReducedRelativeSds?: Record<string, number> | null;
}

export type { PeriodFitResult };

export interface PeriodTaskResult {
  attribute: string;
  /** null when the window could not be fitted (the sentence is in `problem`). */
  result: PeriodFitResult | null;
  problem: string | null;
  /** Set when the reason was an unexpected error rather than the data: logged by the main thread. */
  failure: FitFailure | null;
}

/** A retraining recorded as done, to be judged from the sessions from `eventSession` on. */
export interface RetrainingToEvaluate {
  id: number;
  assessor: string;
  eventSession: string;
}

export interface FlagsTask {
  type: 'flags';
  retraining: RetrainingToEvaluate[];
  /** Without ratings: they travel packed in `ratings` and are unpacked in the worker. */
  history: PanelHistory;
  ratings: PackedRatings;
  /** The panel's thresholds (validated), or null for the defaults. */
  thresholds: unknown;
}

export interface FlagsTaskResult {
  flags: Flag[];
  retraining: { id: number; evaluation: RetrainingEvaluation }[];
}

export type FitTask = SessionTask | PeriodTask | FlagsTask;

export type FitTaskResult<T extends FitTask> = T extends SessionTask
  ? SessionTaskResult
  : T extends PeriodTask
    ? PeriodTaskResult
    : T extends FlagsTask
      ? FlagsTaskResult
      : never;
