/**
 * The `analyze` JSON contract (domain/analysis.ts): ratings → { fits, assessorIndices }.
 * Without `period`: one session model per (session, attribute) and the classic indices of every
 * assessor in it. With `period`: one period model per attribute over all sessions, no indices.
 * Groups keep first-seen order. Data a model cannot be fitted to (one assessor, constant
 * ratings, replicates that never differ, …) leaves that group out of `fits`, lists it in
 * `notFitted` and says why in `notes`; its indices are still computed. An unexpected error of a
 * fit is a fault of the program, not of the data: it is handed to `onFitFailure` (the caller
 * logs it with its stack) and the group is listed as not fitted; other groups go on. Pure: no I/O.
 */
import type { AnalyzeJson, AssessorIndicesJson, FitJson, NotFittedJson } from '../domain/analysis.js';
import type { Observation } from '../domain/ratings.js';
import { computeAnalyzeContractIndices } from './indices/compute-assessor-indices.js';
import { LmmFitError } from './lmm/errors.js';
import { fitPeriodModel } from './lmm/fit-period-model.js';
import { fitSessionModel } from './lmm/fit-session-model.js';

export interface AnalyzeOptions {
  period: boolean;
  /** Receives unexpected errors of a fit (not data conditions), e.g. to log them with the stack. */
  onFitFailure?: (error: unknown, where: { session: string | null; attribute: string }) => void;
}

/** The sentence shown for a group without a fit (the CLI note and the service's pages). */
export const UNEXPECTED_FIT_FAILURE = 'the model failed unexpectedly on these data (a fault of the program, reported in the log)';

/** Why a group has no fit: a plain sentence for people. */
export interface AnalyzeNote {
  session: string | null;
  attribute: string;
  message: string;
}

export function analyzeRatingsWithNotes(ratings: readonly Observation[], options: AnalyzeOptions): { json: AnalyzeJson; notes: AnalyzeNote[] } {
  const fits: FitJson[] = [];
  const assessorIndices: AssessorIndicesJson[] = [];
  const notFitted: NotFittedJson[] = [];
  const notes: AnalyzeNote[] = [];
  const groups = groupBy(ratings, options.period);
  for (const observations of groups) {
    const where = { session: options.period ? null : observations[0].session, attribute: observations[0].attribute };
    try {
      fits.push(options.period ? fitPeriodModel(observations).json : fitSessionModel(observations).json);
    } catch (error) {
      const expected = error instanceof LmmFitError;
      if (!expected) options.onFitFailure?.(error, where);
      const reason = expected ? error.message : UNEXPECTED_FIT_FAILURE;
      notFitted.push({ ...where, model: options.period ? 'period' : 'session', status: 'not-fitted', code: expected ? error.code : 'fit-failed', reason });
      notes.push({ ...where, message: `could not be fitted: ${reason}` });
    }
    if (options.period) continue;
    for (const row of computeAnalyzeContractIndices(observations)) assessorIndices.push(row);
  }
  return { json: { fits, assessorIndices, ...(notFitted.length > 0 ? { notFitted } : {}) }, notes };
}

/** Groups in first-seen order; the lookup is nested so no key string is built per rating. */
function groupBy(rows: readonly Observation[], period: boolean): Observation[][] {
  const groups: Observation[][] = [];
  const byAttribute = new Map<string, Observation[]>(); // period: one group per attribute
  const bySession = new Map<string, Map<string, Observation[]>>(); // else per session, then attribute
  for (const row of rows) {
    let within = byAttribute;
    if (!period) {
      let inSession = bySession.get(row.session);
      if (!inSession) bySession.set(row.session, (inSession = new Map()));
      within = inSession;
    }
    let group = within.get(row.attribute);
    if (!group) {
      within.set(row.attribute, (group = []));
      groups.push(group);
    }
    group.push(row);
  }
  return groups;
}
