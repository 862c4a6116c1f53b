/**
 * The balanced session's closed-form REML solution (methods §1.2–1.3) and its JSON: the stage of
 * fitSessionModel that answers without a model frame or an optimiser when the session is
 * balanced. The REML criterion of a balanced session is a sum over orthogonal strata,
 * Σ df (log λ + MS/λ), in the expected mean squares λ_A ≥ λ_AP ≥ λ_E (see closedFormJson), so its
 * minimum under that order is the MS of each stratum, pooling adjacent strata whose MS break the
 * order (order-restricted estimation of this kind of sum: pool adjacent violators).
 */
import type { FitJson } from '../../domain/analysis.js';
import { fUpperTail } from '../distributions/index.js';
import type { BalancedAnova } from './balanced-anova.js';
import type { ProductTest } from './satterthwaite.js';

export interface ClosedForm {
  theta: Float64Array;
  /** The variance estimates θ describes (interaction 0 in the model without it). */
  variances: { assessor: number; interaction: number; residual: number };
  /** Denominator mean square and its df of the product F-test. */
  denominatorMeanSquare: number;
  denominatorDf: number;
}


/**
 * The session JSON of a balanced session from its closed-form REML solution. The data split into
 * orthogonal strata (assessor, assessor × product, within cells) with expected mean squares
 * λ_A = σ² + nσ²_ap + nPσ²_a, λ_AP = σ² + nσ²_ap, λ_E = σ²; product contrasts lie in the
 * assessor × product stratum and the intercept in the assessor stratum, so (−2 × restricted
 * log-likelihood, lme4's REMLcrit, which keeps log|XᵀV⁻¹X|)
 *   REMLcrit = (N − P) log 2π + Σ_strata [df log λ + SS/λ] + P log(An),
 * product means are the raw means with SE² = (σ²_a + σ²_ap)/A + σ²/(An), and an assessor's
 * conditional mode given β̂ is nPσ²_a/λ_A · (ȳ_a·· − ȳ···) with conditional variance σ²_a λ_AP/λ_A
 * (lme4's ranef(condVar = TRUE)). Without replicates the interaction is the error (σ²_ap = 0, n = 1).
 */
export function closedFormJson(
  session: string | null,
  attribute: string,
  anova: BalancedAnova,
  closedForm: ClosedForm,
  withInteraction: boolean,
  assessorLevels: string[],
  productLevels: string[],
): FitJson {
  const { nAssessors: nA, nProducts: nP, nReplicates: n } = anova;
  const { assessor, interaction, residual } = closedForm.variances;
  const lambdaAP = residual + n * interaction;
  const lambdaA = lambdaAP + n * nP * assessor;
  const nObservations = nA * nP * n;
  let remlCriterion =
    (nObservations - nP) * Math.log(2 * Math.PI) +
    nP * Math.log(nA * n) +
    anova.dfAssessor * Math.log(lambdaA) +
    (anova.msAssessor * anova.dfAssessor) / lambdaA +
    anova.dfInteraction * Math.log(lambdaAP) +
    (anova.msInteraction * anova.dfInteraction) / lambdaAP;
  if (anova.dfError > 0) remlCriterion += anova.dfError * Math.log(residual) + (anova.msError * anova.dfError) / residual;
  const test = closedFormProductTest(anova, closedForm);
  const se = Math.sqrt((assessor + interaction) / nA + residual / (nA * n));
  const shrinkage = (n * nP * assessor) / lambdaA;
  const condSD = Math.sqrt((assessor * lambdaAP) / lambdaA);
  return {
    session,
    attribute,
    model: 'session',
    n: nObservations,
    assessors: nA,
    products: nP,
    variance: { assessor, 'assessor:product': withInteraction ? interaction : null, residual },
    remlCriterion,
    productTest: { F: test.F, numDf: test.numDf, denDf: test.denDf, p: test.pValue },
    productMeans: productLevels.map((product, p) => ({ product, mean: anova.productMeans[p], se })),
    assessorEffects: assessorLevels.map((level, a) => ({ assessor: level, blup: shrinkage * (anova.assessorMeans[a] - anova.grandMean), condSD })),
  };
}

/**
 * The REML solution of a balanced session in closed form (methods notes §1.2–1.3): the ANOVA
 * estimates when all are positive; with one negative estimate, that component at 0 and the
 * ANOVA estimates of the model without it (its sum of squares pooled into the line below).
 * Null when no closed form applies (two negative estimates, or a pooled estimate not positive).
 */
export function balancedClosedForm(anova: BalancedAnova, withInteraction: boolean): ClosedForm | null {
  const { nReplicates: n, nProducts: p } = anova;
  const ssA = anova.msAssessor * anova.dfAssessor;
  const ssAP = anova.msInteraction * anova.dfInteraction;
  // A component is positive only when its mean square exceeds the one below it by more than
  // rounding: at an exact tie the REML estimate is 0 and the test uses the pooled line.
  const above = (upper: number, lower: number): number => (exceeds(upper, lower, anova.grandMean) ? upper - lower : 0);
  if (withInteraction) {
    const residual = anova.msError;
    if (!(residual > 0)) return null;
    const interaction = above(anova.msInteraction, anova.msError) / n;
    const assessor = above(anova.msAssessor, anova.msInteraction) / (n * p);
    if (interaction > 0 && assessor > 0) {
      return {
        theta: Float64Array.of(Math.sqrt(assessor / residual), Math.sqrt(interaction / residual)),
        variances: { assessor, interaction, residual },
        denominatorMeanSquare: anova.msInteraction,
        denominatorDf: anova.dfInteraction,
      };
    }
    if (!(interaction > 0) && assessor > 0) {
      // Interaction at 0: error and interaction lines pooled.
      const dfPooled = anova.dfInteraction + anova.dfError;
      const pooled = (ssAP + anova.msError * anova.dfError) / dfPooled;
      const pooledAssessor = above(anova.msAssessor, pooled) / (n * p);
      if (!(pooledAssessor > 0)) return null;
      return {
        theta: Float64Array.of(Math.sqrt(pooledAssessor / pooled), 0),
        variances: { assessor: pooledAssessor, interaction: 0, residual: pooled },
        denominatorMeanSquare: pooled,
        denominatorDf: dfPooled,
      };
    }
    if (interaction > 0 && !(assessor > 0)) {
      // Assessor at 0: assessor and interaction lines pooled.
      const dfPooled = anova.dfAssessor + anova.dfInteraction;
      const pooled = (ssA + ssAP) / dfPooled;
      const pooledInteraction = above(pooled, residual) / n;
      if (!(pooledInteraction > 0)) return null;
      return {
        theta: Float64Array.of(0, Math.sqrt(pooledInteraction / residual)),
        variances: { assessor: 0, interaction: pooledInteraction, residual },
        denominatorMeanSquare: pooled,
        denominatorDf: dfPooled,
      };
    }
    return null;
  }
  if (n !== 1) return null;
  const residual = anova.msInteraction;
  if (!(residual > 0)) return null;
  const assessor = above(anova.msAssessor, anova.msInteraction) / p;
  if (assessor > 0) {
    return {
      theta: Float64Array.of(Math.sqrt(assessor / residual)),
      variances: { assessor, interaction: 0, residual },
      denominatorMeanSquare: residual,
      denominatorDf: anova.dfInteraction,
    };
  }
  const dfPooled = anova.dfAssessor + anova.dfInteraction;
  const pooled = (ssA + ssAP) / dfPooled;
  return { theta: Float64Array.of(0), variances: { assessor: 0, interaction: 0, residual: pooled }, denominatorMeanSquare: pooled, denominatorDf: dfPooled };
}

/**
 * Relative tolerance of a mean-square comparison: 64 units in the last place. Mean squares of
 * equal rational value (integer ratings tie exactly about once in 300 small sessions) come out
 * a few ulps apart, because they are sums of squared deviations from means computed in floating
 * point.
 */
export const MEAN_SQUARE_TIE_ULPS = 64;

/**
 * True when mean square `upper` exceeds `lower` by more than rounding. A deviation from a mean
 * of size |ȳ| carries an absolute error of about ε|ȳ|, so a mean square MS carries one of about
 * ε(MS + |ȳ|√MS): the tolerance scales with both the mean squares and the data's level.
 */
export function exceeds(upper: number, lower: number, grandMean: number): boolean {
  const scale = Math.max(Math.abs(upper), Math.abs(lower));
  const tolerance = MEAN_SQUARE_TIE_ULPS * Number.EPSILON * (scale + Math.abs(grandMean) * Math.sqrt(scale));
  return upper - lower > tolerance;
}

export function closedFormProductTest(anova: BalancedAnova, closedForm: ClosedForm): ProductTest {
  const F = anova.msProduct / closedForm.denominatorMeanSquare;
  const denDf = closedForm.denominatorDf;
  return { F, numDf: anova.dfProduct, denDf, pValue: fUpperTail(F, anova.dfProduct, denDf), nuPerContrast: [denDf], messages: [] };
}

/** ANOVA-type start values, kept away from the boundary so every direction is explored. */
export function startTheta(anova: BalancedAnova | null, withInteraction: boolean): number[] {
  if (!anova) return withInteraction ? [0.5, 0.5] : [0.5];
  const n = anova.nReplicates;
  const residual = withInteraction ? anova.msError : anova.msInteraction;
  if (!(residual > 0)) return withInteraction ? [0.5, 0.5] : [0.5];
  const clip = (variance: number): number => Math.sqrt(Math.max(variance / residual, 0.01));
  if (!withInteraction) return [clip((anova.msAssessor - anova.msInteraction) / anova.nProducts)];
  return [clip((anova.msAssessor - anova.msInteraction) / (n * anova.nProducts)), clip((anova.msInteraction - anova.msError) / n)];
}

