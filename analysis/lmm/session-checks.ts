/**
 * Checks and level coding of one session's ratings before any fit (fitSessionModel, and the
 * period model's checks): one group, finite and varying ratings, replicate variation, a
 * residual variance above rounding, and the sorted level codes the model frame uses.
 */
import { LevelCoder } from '../../domain/level-coder.js';
import type { Observation } from '../../domain/ratings.js';
import { LmmFitError } from './errors.js';
import { compareLevels } from './model-frame.js';

/**
 * Sorted levels (code-unit order, as the model frame) and each value's level index. Codes are
 * given in first-seen order (consecutive ratings mostly repeat the assessor: compared before
 * hashing) and renumbered after sorting the few levels.
 */
export function codeLevels(values: readonly string[]): { levels: string[]; codes: Int32Array } {
  const n = values.length;
  const coder = new LevelCoder<string>();
  const codes = new Int32Array(n);
  for (let i = 0; i < n; i++) codes[i] = coder.code(values[i]);
  const levels = [...coder.names].sort(compareLevels);
  const sortedCode = new Int32Array(levels.length);
  levels.forEach((level, position) => (sortedCode[coder.find(level)!] = position));
  for (let i = 0; i < n; i++) codes[i] = sortedCode[codes[i]];
  return { levels, codes };
}

/**
 * codeLevels of the names that ids stand for (`names[ids[i]]`), without hashing a string per
 * rating: the ids are coded first-seen through a lookup table, then renumbered after sorting the
 * few levels by name. Same levels and codes as codeLevels on the names.
 */
export function codeIds(ids: Int32Array, names: readonly string[]): { levels: string[]; codes: Int32Array } {
  const n = ids.length;
  const localOf = new Int32Array(names.length).fill(-1);
  const seen: number[] = [];
  const codes = new Int32Array(n);
  for (let i = 0; i < n; i++) {
    let local = localOf[ids[i]];
    if (local < 0) {
      local = localOf[ids[i]] = seen.length;
      seen.push(ids[i]);
    }
    codes[i] = local;
  }
  // One array shape for assessors and products alike (a mapped array's shape follows its source),
  // so the compiled code serves both.
  const levels: string[] = [];
  for (let k = 0; k < seen.length; k++) levels.push(names[seen[k]]);
  levels.sort(compareLevels);
  const sortedCode = new Int32Array(levels.length);
  const position = new Map(levels.map((level, at) => [level, at]));
  seen.forEach((id, local) => (sortedCode[local] = position.get(names[id])!));
  for (let i = 0; i < n; i++) codes[i] = sortedCode[codes[i]];
  return { levels, codes };
}

/** True when some assessor × product cell holds more than one rating. */
export function hasReplicatedCell(assessorCodes: Int32Array, productCodes: Int32Array, nProducts: number): boolean {
  let nAssessors = 0;
  for (let i = 0; i < assessorCodes.length; i++) if (assessorCodes[i] >= nAssessors) nAssessors = assessorCodes[i] + 1;
  // Codes are dense, so a table of cells instead of a hash set (520 sessions × 140 ratings a year).
  const seen = new Uint8Array(nAssessors * nProducts);
  for (let i = 0; i < assessorCodes.length; i++) {
    const cell = assessorCodes[i] * nProducts + productCodes[i];
    if (seen[cell] !== 0) return true;
    seen[cell] = 1;
  }
  return false;
}

export function checkOneGroup(observations: Observation[], perSession = true): { session: string | null; attribute: string } {
  if (observations.length === 0) throw new LmmFitError('no-observations', 'there are no ratings to fit');
  const attribute = observations[0].attribute;
  const session = observations[0].session;
  for (const row of observations) {
    if (row.attribute !== attribute) throw new LmmFitError('mixed-groups', 'one fit takes the ratings of one attribute only');
    if (perSession && row.session !== session) throw new LmmFitError('mixed-groups', 'a session model takes the ratings of one session only');
  }
  return { session: perSession ? session : null, attribute };
}

export function checkResponse(values: number[]): void {
  if (values.some((value) => !Number.isFinite(value))) throw new LmmFitError('not-finite', 'some ratings are missing or not numbers');
  if (values.every((value) => value === values[0])) {
    throw new LmmFitError('constant-response', 'all ratings are identical: there is no variation to model');
  }
}

/**
 * Replicates that never differ leave the residual variance at 0: the relative SDs θ = σ_term/σ
 * are then unbounded and the REML criterion has no minimum (lmer stops with a residual SD near 0
 * and convergence warnings). Such data have no model, only a note.
 */
export function checkReplicateVariation(values: number[], assessorCodes: Int32Array, productCodes: Int32Array, nAssessors: number, nProducts: number): void {
  const first = new Float64Array(nAssessors * nProducts).fill(Number.NaN);
  for (let i = 0; i < values.length; i++) {
    const cell = assessorCodes[i] * nProducts + productCodes[i];
    if (Number.isNaN(first[cell])) first[cell] = values[i];
    else if (first[cell] !== values[i]) return;
  }
  throw new LmmFitError('no-residual-variation', 'no replicate variation: every assessor gave identical ratings to each product');
}

/**
 * A residual variance below this fraction of the ratings' variance is rounding, not an estimate:
 * the model's terms reproduce every rating exactly (e.g. ratings that are exactly an assessor
 * level plus a product level), so the F-test would divide by zero.
 */
export const RESIDUAL_VARIANCE_FLOOR = 1e-10;

/** `levels` names the model's factors for the sentence, e.g. "assessor and product". */
export function checkResidualVariation(residualVariance: number, values: ArrayLike<number>, levels: string): void {
  const n = values.length;
  let mean = 0;
  for (let i = 0; i < n; i++) mean += values[i] / n;
  let sumOfSquares = 0;
  for (let i = 0; i < n; i++) sumOfSquares += (values[i] - mean) ** 2;
  if (residualVariance > RESIDUAL_VARIANCE_FLOOR * (sumOfSquares / (values.length - 1))) return;
  throw noResidualVariation(levels);
}

export function noResidualVariation(levels: string): LmmFitError {
  return new LmmFitError('no-residual-variation', `no residual variation: the ${levels} levels reproduce every rating exactly, so the variances cannot be estimated`);
}
