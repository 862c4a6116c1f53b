/**
 * The `analyze` contract (issue 3, part 5): ratings → { fits, assessorIndices }.
 * Without `period`: one session model per (session, attribute) and the classic indices of every
 * assessor in it. With `period`: one period model per attribute over all sessions, no indices.
 * Groups keep first-seen order. Data a model cannot be fitted to (one assessor, constant
 * ratings, …) leaves that group out of `fits` and says why in `notes`; its indices are still
 * computed. Pure: no I/O.
 */
import type { AnalyzeJson, AssessorIndicesJson, FitJson } from '../domain/analysis.js';
import type { Observation } from '../domain/ratings.js';
import { computeAssessorIndices } from './indices/compute-assessor-indices.js';
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

export function analyzeRatings(ratings: readonly Observation[], options: AnalyzeOptions): AnalyzeJson {
  return analyzeRatingsWithNotes(ratings, options).json;
}

export function analyzeRatingsWithNotes(ratings: readonly Observation[], options: AnalyzeOptions): { json: AnalyzeJson; notes: AnalyzeNote[] } {
  const fits: FitJson[] = [];
  const assessorIndices: AssessorIndicesJson[] = [];
  const notes: AnalyzeNote[] = [];
  const groups = groupBy(ratings, (row) => (options.period ? row.attribute : `${row.session}\u0000${row.attribute}`));
  for (const observations of groups) {
    const { session, attribute } = observations[0];
    const fit = tryFit(() => (options.period ? fitPeriodModel(observations).json : fitSessionModel(observations).json), {
      session: options.period ? null : session,
      attribute,
      notes,
    });
    if (fit) fits.push(fit);
    if (options.period) continue;
    const indices = computeAssessorIndices(observations, { panelProductPValue: fit ? fit.productTest.p : undefined });
    for (const row of indices) {
      assessorIndices.push({
        session: row.session,
        attribute: row.attribute,
        assessor: row.assessor,
        offset: row.offset,
        discriminationF: row.discriminationF,
        discriminationP: row.discriminationP,
        repeatabilityMSE: row.repeatabilityMSE,
        agreementR: row.agreementR,
        scaling: row.scaling,
      });
    }
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

function groupBy(rows: readonly Observation[], key: (row: Observation) => string): Observation[][] {
  const groups = new Map<string, Observation[]>();
  for (const row of rows) {
    const name = key(row);
    const group = groups.get(name);
    if (group) group.push(row);
    else groups.set(name, [row]);
  }
  return [...groups.values()];
}
