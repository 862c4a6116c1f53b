/**
 * The `analyze` JSON contract (domain/analysis.ts): ratings → { fits, assessorIndices }.
 * Without `period`: one session model per (session, attribute) and the classic indices of every
 * assessor in it. With `period`: one period model per attribute over all sessions, no indices.
 * Groups keep first-seen order. Data a model cannot be fitted to (one assessor, constant
 * ratings, …) leaves that group out of `fits` and says why in `notes`; its indices are still
 * computed. Pure: no I/O.
 */
import type { AnalyzeJson, AssessorIndicesJson, FitJson } from '../domain/analysis.js';
import type { Observation } from '../domain/ratings.js';
import { computeAnalyzeContractIndices } from './indices/compute-assessor-indices.js';
import { LmmFitError } from './lmm/errors.js';
import { fitPeriodModel } from './lmm/fit-period-model.js';
import { fitSessionModel } from './lmm/fit-session-model.js';

export interface AnalyzeOptions {
  period: boolean;
}

/** Why a group has no fit: a plain sentence for people. */
export interface AnalyzeNote {
  session: string | null;
  attribute: string;
  message: string;
}

export function analyzeRatingsWithNotes(ratings: readonly Observation[], options: AnalyzeOptions): { json: AnalyzeJson; notes: AnalyzeNote[] } {
  const fits: FitJson[] = [];
  const assessorIndices: AssessorIndicesJson[] = [];
  const notes: AnalyzeNote[] = [];
  const groups = groupBy(ratings, options.period);
  for (const observations of groups) {
    const { session, attribute } = observations[0];
    const fit = tryFit(() => (options.period ? fitPeriodModel(observations).json : fitSessionModel(observations).json), {
      session: options.period ? null : session,
      attribute,
      notes,
    });
    if (fit) fits.push(fit);
    if (options.period) continue;
    for (const row of computeAnalyzeContractIndices(observations)) assessorIndices.push(row);
  }
  return { json: { fits, assessorIndices }, notes };
}

function tryFit(fit: () => FitJson, where: { session: string | null; attribute: string; notes: AnalyzeNote[] }): FitJson | null {
  try {
    return fit();
  } catch (error) {
    if (!(error instanceof LmmFitError)) throw error;
    where.notes.push({ session: where.session, attribute: where.attribute, message: `not fitted: ${error.message}` });
    return null;
  }
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
