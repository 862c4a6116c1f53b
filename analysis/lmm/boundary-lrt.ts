/**
 * Likelihood-ratio test of one variance component against 0: refit with that component fixed at
 * zero (the model without the term), LR = criterion(reduced) − criterion(full) on lme4's
 * REMLcrit/deviance scale, p from the 50:50 mixture of χ²₀ and χ²₁ (Self & Liang 1987;
 * Stram & Lee 1994). LR is clipped at 0 (a full fit with the component already at 0 gives p = 1).
 */
import { boundaryLrtPValue } from '../distributions/index.js';
import type { RemlObjective } from './criterion.js';
import { minimizeBounded } from './optimise.js';

export interface BoundaryLrt {
  term: string;
  likelihoodRatio: number;
  pValue: number;
  /** Criterion of the reduced fit. */
  reducedCriterion: number;
  reducedConverged: boolean;
  /** θ of the reduced fit, without the tested term. */
  reducedTheta: Float64Array;
}

export function boundaryLikelihoodRatioTest(
  objective: RemlObjective,
  full: { theta: ArrayLike<number>; criterion: number },
  termName: string,
  startTheta?: number[],
  /** Another start (e.g. a stored fit's reduced θ), used when the criterion there is lower. */
  alternativeStart?: number[] | null,
): BoundaryLrt {
  const index = objective.frame.terms.findIndex((term) => term.name === termName);
  if (index < 0) throw new Error(`no random term "${termName}" in this model`);
  const nTheta = objective.nTheta;
  const expand = (theta: ArrayLike<number>): Float64Array => {
    const expanded = new Float64Array(nTheta);
    for (let k = 0, j = 0; k < nTheta; k++) expanded[k] = k === index ? 0 : theta[j++];
    return expanded;
  };
  const withGradient = (theta: ArrayLike<number>): { value: number; gradient: Float64Array } => {
    const result = objective.valueAndGradient(expand(theta));
    return { value: result.value, gradient: result.gradient.filter((_, k) => k !== index) };
  };
  let start = startTheta ?? Array.from(full.theta).filter((_, k) => k !== index).map((value) => Math.max(value, 0.05));
  if (alternativeStart && alternativeStart.length === start.length && alternativeStart.every((value) => Number.isFinite(value) && value >= 0)) {
    const lifted = alternativeStart.map((value) => Math.max(value, 0.01));
    // The other start last: when it is taken, the search's first evaluation reuses its factor.
    const atStart = objective.evaluate(expand(start));
    if (objective.evaluate(expand(lifted)) < atStart) start = lifted;
  }
  // The average information of the full model at θ with the term at 0 is the reduced model's.
  const kept = [...Array(nTheta).keys()].filter((k) => k !== index);
  const approximateHessian = (theta: ArrayLike<number>): Float64Array | null => {
    const full = objective.averageInformation(expand(theta));
    return full && Float64Array.from({ length: kept.length ** 2 }, (_, at) => full[kept[Math.floor(at / kept.length)] * nTheta + kept[at % kept.length]]);
  };
  const reduced = minimizeBounded((theta) => objective.evaluate(expand(theta)), start, {}, withGradient, { approximateHessian });
  const likelihoodRatio = Math.max(reduced.value - full.criterion, 0);
  return {
    term: termName,
    likelihoodRatio,
    pValue: boundaryLrtPValue(likelihoodRatio),
    reducedCriterion: reduced.value,
    reducedConverged: reduced.converged,
    reducedTheta: reduced.theta,
  };
}
