/**
 * The mixed-model solution at θ from a factor (criterion-factor.ts): fixed effects, conditional
 * modes, cov(β̂) and the conditional variances of the random effects.
 */
import { blockArrowInverseDiagonal } from '../linalg/block-arrow.js';
import { inverseFromCholesky } from '../linalg/dense.js';
import { fixedEffectsAndModes, type CriterionFactor, type CriterionParts, type CriterionSetting } from './criterion-factor.js';

export interface MixedModelSolution extends CriterionParts {
  theta: Float64Array;
  /** Residual SD at this θ (REML: √(pwrss/(n−p)); ML: √(pwrss/n)), as lme4's sigma(). */
  sigma: number;
  /** Fixed effects on the data scale (intercept first, then treatment contrasts). */
  beta: Float64Array;
  /** (R_Xᵀ R_X)⁻¹, so cov(β̂) = σ² × this (row-major p×p). */
  unscaledCovBeta: Float64Array;
  /** Conditional modes b = Λu of each term's random effects, by level, data scale. */
  randomEffects: Float64Array[];
  /** Conditional variances Var(b | y) of each level of term k, as lme4's ranef(condVar = TRUE). */
  conditionalVariances(termIndex: number): Float64Array;
}

/** The solution from a factor whose criterion is finite (the caller checks). */
export function solutionFromFactor(setting: CriterionSetting, factor: CriterionFactor): MixedModelSolution {
  const { frame } = setting;
  const { lambda } = factor;
  // Spherical random effects u = L⁻ᵀ (c_u − R_ZX β), then b = Λu.
  const u = new Float64Array(frame.layout.size);
  const beta = fixedEffectsAndModes(setting, factor, u);
  beta[0] += frame.responseCentre;
  const randomEffects = frame.terms.map((term, k) =>
    Float64Array.from(term.levels, (_, level) => {
      const position = frame.positionOf[k][level];
      return lambda[position] * u[position];
    }),
  );
  const unscaledCovBeta = inverseFromCholesky(factor.rx, frame.nFixed);
  const sigma = Math.sqrt(factor.parts.pwrss / setting.degreesOfFreedom);
  return {
    ...factor.parts,
    theta: factor.theta.slice(),
    sigma,
    beta,
    unscaledCovBeta,
    randomEffects,
    conditionalVariances(termIndex: number): Float64Array {
      const positions = frame.positionOf[termIndex];
      return Float64Array.from(positions, (position) => {
        const scale = lambda[position];
        if (scale === 0) return 0;
        return sigma * sigma * scale * scale * blockArrowInverseDiagonal(factor.arrow, position);
      });
    },
  };
}
