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
import { LevelCoder } from '../domain/level-coder.js';
import type { Observation, RatingColumns, RatingGroup } from '../domain/ratings.js';
import { contractIndicesOfGroup } from './indices/contract-indices.js';
import { LmmFitError } from './lmm/errors.js';
import { fitPeriodModel } from './lmm/fit-period-model.js';
import { fitSessionGroup } from './lmm/fit-session-model.js';

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
  return analyzeRatingColumns(toColumns(ratings), options);
}

/** analyzeRatingsWithNotes on ratings as columns (the analyze command's form: no object per rating). */
export function analyzeRatingColumns(columns: RatingColumns, options: AnalyzeOptions): { json: AnalyzeJson; notes: AnalyzeNote[] } {
  const fits: FitJson[] = [];
  const assessorIndices: AssessorIndicesJson[] = [];
  const { notFitted, notes } = analyzeRatingColumnsInto(columns, options, {
    fit: (fit) => fits.push(fit),
    indices: (rows) => {
      for (const row of rows) assessorIndices.push(row);
    },
  });
  return { json: { fits, assessorIndices, ...(notFitted.length > 0 ? { notFitted } : {}) }, notes };
}

/** Receives the analysis as it is made: every fit (group order), then every group's indices. */
export interface AnalyzeSink {
  fit(fit: FitJson): void;
  indices(rows: AssessorIndicesJson[]): void;
}

/**
 * The analysis handed over piece by piece, in the JSON contract's order: all fits first, then all
 * indices; what cannot be fitted comes back. A caller that writes each piece out keeps none of
 * them: a year's 520 fits and 6,240 index rows are never all in memory (fresh memory is what
 * costs, bench/README.md 2026-12-05).
 */
export function analyzeRatingColumnsInto(columns: RatingColumns, options: AnalyzeOptions, sink: AnalyzeSink): { notFitted: NotFittedJson[]; notes: AnalyzeNote[] } {
  const notFitted: NotFittedJson[] = [];
  const notes: AnalyzeNote[] = [];
  const groups = groupRows(columns, options.period);
  for (const rows of groups) {
    const group = ratingGroup(columns, rows);
    const where = { session: options.period ? null : group.session, attribute: group.attribute };
    let fit: FitJson;
    try {
      fit = options.period ? fitPeriodModel(observationsOf(columns, rows)).json : fitSessionGroup(group).json;
    } catch (error) {
      const expected = error instanceof LmmFitError;
      if (!expected) options.onFitFailure?.(error, where);
      const reason = expected ? error.message : UNEXPECTED_FIT_FAILURE;
      notFitted.push({ ...where, model: options.period ? 'period' : 'session', status: 'not-fitted', code: expected ? error.code : 'fit-failed', reason });
      notes.push({ ...where, message: `could not be fitted: ${reason}` });
      continue;
    }
    // Outside the try: a fault of the sink (writing) is not a fit failure.
    sink.fit(fit);
  }
  if (!options.period) for (const rows of groups) sink.indices(contractIndicesOfGroup(ratingGroup(columns, rows)));
  return { notFitted, notes };
}

/** Observations as columns, names coded in first-seen order. */
function toColumns(ratings: readonly Observation[]): RatingColumns {
  const n = ratings.length;
  const coders = [new LevelCoder<string>(), new LevelCoder<string>(), new LevelCoder<string>(), new LevelCoder<string>()];
  const [session, attribute, assessor, product] = coders.map(() => new Int32Array(n));
  const replicate = new Int32Array(n);
  const value = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const row = ratings[i];
    session[i] = coders[0].code(row.session);
    attribute[i] = coders[1].code(row.attribute);
    assessor[i] = coders[2].code(row.assessor);
    product[i] = coders[3].code(row.product);
    replicate[i] = row.replicate;
    value[i] = row.value;
  }
  const [sessionNames, attributeNames, assessorNames, productNames] = coders.map((coder) => coder.names);
  return { n, session, attribute, assessor, product, replicate, value, sessionNames, attributeNames, assessorNames, productNames };
}

/**
 * Row numbers of each group (per session and attribute, or per attribute with `period`), groups
 * in first-seen order and rows in file order within a group.
 */
function groupRows(columns: RatingColumns, period: boolean): Int32Array[] {
  const n = columns.n;
  const nAttributes = columns.attributeNames.length;
  const groupOfKey = new Map<number, number>();
  const groupOf = new Int32Array(n);
  const sizes: number[] = [];
  let lastKey = -1;
  let lastGroup = -1;
  for (let i = 0; i < n; i++) {
    const key = period ? columns.attribute[i] : columns.session[i] * nAttributes + columns.attribute[i];
    // Consecutive rows mostly share the group: compare before hashing.
    if (key !== lastKey) {
      let group = groupOfKey.get(key);
      if (group === undefined) {
        groupOfKey.set(key, (group = sizes.length));
        sizes.push(0);
      }
      lastKey = key;
      lastGroup = group;
    }
    groupOf[i] = lastGroup;
    sizes[lastGroup]++;
  }
  const groups = sizes.map((size) => new Int32Array(size));
  const filled = new Int32Array(sizes.length);
  for (let i = 0; i < n; i++) groups[groupOf[i]][filled[groupOf[i]]++] = i;
  return groups;
}

function ratingGroup(columns: RatingColumns, rows: Int32Array): RatingGroup {
  const m = rows.length;
  const values: number[] = new Array(m);
  const assessorIds = new Int32Array(m);
  const productIds = new Int32Array(m);
  for (let k = 0; k < m; k++) {
    const i = rows[k];
    values[k] = columns.value[i];
    assessorIds[k] = columns.assessor[i];
    productIds[k] = columns.product[i];
  }
  const first = rows[0];
  return {
    session: columns.sessionNames[columns.session[first]],
    attribute: columns.attributeNames[columns.attribute[first]],
    values,
    assessorIds,
    productIds,
    assessorNames: columns.assessorNames,
    productNames: columns.productNames,
  };
}

/** The group's ratings as objects (the period model takes them so). */
function observationsOf(columns: RatingColumns, rows: Int32Array): Observation[] {
  return Array.from(rows, (i) => ({
    session: columns.sessionNames[columns.session[i]],
    assessor: columns.assessorNames[columns.assessor[i]],
    product: columns.productNames[columns.product[i]],
    replicate: columns.replicate[i],
    attribute: columns.attributeNames[columns.attribute[i]],
    value: columns.value[i],
  }));
}
