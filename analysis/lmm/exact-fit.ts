/**
 * Whether a model's factors reproduce the ratings exactly (residual variance 0). Then the
 * relative SDs θ = σ_term/σ are unbounded, the REML criterion has no minimum and the mixed-model
 * equations become singular on the way to θ → ∞: such data get a note, not a fit.
 *
 * The test is backfitting (Gauss–Seidel on the normal equations of the fixed factor and every
 * random term taken as fixed): the residual is swept with each factor's level means in turn,
 * which converges to the least-squares residual on all of them (Hastie & Tibshirani 1990,
 * Generalized Additive Models, ch. 5). One sweep suffices for balanced data.
 */
import type { ModelFrame } from './model-frame.js';

/** The residual sum of squares counts as 0 below this fraction of the total. */
const ZERO_RESIDUAL_FRACTION = 1e-20;
const MAX_SWEEPS = 500;

export function reproducedExactly(frame: ModelFrame): boolean {
  const n = frame.nObservations;
  const residual = Float64Array.from(frame.response, (value) => value - frame.responseCentre);
  let total = 0;
  for (const value of residual) total += value * value;
  if (total === 0) return true;
  const factors = [{ index: frame.fixedIndex, levels: frame.fixedLevels.length }, ...frame.terms.map((term) => ({ index: term.index, levels: term.levels.length }))];
  let previous = total;
  for (let sweep = 0; sweep < MAX_SWEEPS; sweep++) {
    for (const { index, levels } of factors) {
      const sums = new Float64Array(levels);
      const counts = new Float64Array(levels);
      for (let i = 0; i < n; i++) {
        sums[index[i]] += residual[i];
        counts[index[i]]++;
      }
      for (let i = 0; i < n; i++) residual[i] -= sums[index[i]] / counts[index[i]];
    }
    let rss = 0;
    for (const value of residual) rss += value * value;
    if (rss <= ZERO_RESIDUAL_FRACTION * total) return true;
    // Stalled above zero: a residual is left that no factor explains.
    if (rss > previous * (1 - 1e-9)) return false;
    previous = rss;
  }
  return false;
}
