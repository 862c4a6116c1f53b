/**
 * The per-session, per-attribute model (issue 3, part 3):
 *   value ~ product + (1|assessor) + (1|assessor:product)   when some assessor × product cell has > 1 value,
 *   value ~ product + (1|assessor)                           otherwise (the interaction is then the error).
 * Balanced sessions whose ANOVA estimates are all positive take the closed-form fast path
 * (the ANOVA solution is the REML solution; the optimiser only confirms the gradient).
 */
import type { FitJson } from '../../domain/analysis.js';
import type { Observation } from '../../domain/ratings.js';
import { fUpperTail } from '../distributions/index.js';
import { balancedAnova, type BalancedAnova } from './balanced-anova.js';
import { makeRemlObjective } from './criterion.js';
import { LmmFitError } from './errors.js';
import { confirmClosedForm, fitFromObjective, type LmmDiagnostics, type LmmFit } from './fit.js';
import { buildModelFrame } from './model-frame.js';
import type { ProductTest } from './satterthwaite.js';

export interface SessionModelDiagnostics extends LmmDiagnostics {
  /** True when the balanced closed form was used. */
  balancedFastPath: boolean;
}

export interface SessionModelFit {
  json: FitJson;
  diagnostics: SessionModelDiagnostics;
  /** True for value ~ product + (1|assessor) + (1|assessor:product). */
  withInteraction: boolean;
  fit: LmmFit;
}

export const ASSESSOR = 'assessor';
export const ASSESSOR_PRODUCT = 'assessor:product';

export function fitSessionModel(observations: Observation[]): SessionModelFit {
  const { session, attribute } = checkOneGroup(observations);
  const assessors = observations.map((row) => row.assessor);
  const products = observations.map((row) => row.product);
  const values = observations.map((row) => row.value);
  checkResponse(values);
  const nAssessors = new Set(assessors).size;
  if (nAssessors < 2) throw new LmmFitError('too-few-assessors', `only ${nAssessors} assessor rated ${attribute}: a panel model needs at least 2`);

  // With one product the interaction would duplicate the assessor term (not identifiable).
  const withInteraction = hasReplicatedCell(assessors, products) && new Set(products).size > 1;
  const frame = buildModelFrame({
    response: values,
    columns: { assessor: assessors, product: products },
    fixedFactor: 'product',
    randomTerms: withInteraction ? [['assessor'], ['assessor', 'product']] : [['assessor']],
  });
  if (frame.nObservations <= frame.nFixed) {
    throw new LmmFitError('too-few-observations', `${frame.nObservations} ratings of ${attribute} are too few for ${frame.nFixed} products`);
  }
  const objective = makeRemlObjective(frame);
  const anova = frame.nFixed > 1 ? balancedAnova(values, frame.terms[0].index, frame.fixedIndex, nAssessors, frame.nFixed) : null;
  const closedForm = anova ? balancedClosedForm(anova, withInteraction) : null;

  let fit: LmmFit;
  let fastPath = false;
  if (anova && closedForm) {
    const confirmed = confirmClosedForm(objective, closedForm.theta, closedFormProductTest(anova, closedForm), [ASSESSOR]);
    fit = confirmed.fit;
    fastPath = confirmed.confirmed;
  } else {
    fit = fitFromObjective(objective, { startTheta: startTheta(anova, withInteraction), randomEffectTerms: [ASSESSOR] });
  }
  if (nAssessors < 3) fit.diagnostics.messages.push(`too few assessors (${nAssessors}): the assessor variance is poorly determined`);

  const json: FitJson = {
    session,
    attribute,
    model: 'session',
    n: frame.nObservations,
    assessors: nAssessors,
    products: frame.nFixed,
    variance: {
      assessor: fit.variances[ASSESSOR],
      'assessor:product': withInteraction ? fit.variances[ASSESSOR_PRODUCT] : null,
      residual: fit.residualVariance,
    },
    remlCriterion: fit.criterion,
    productTest: {
      F: fit.productTest.F,
      numDf: fit.productTest.numDf,
      denDf: fit.productTest.denDf,
      p: fit.productTest.pValue,
    },
    productMeans: fit.productMeans.map((mean) => ({ ...mean })),
    assessorEffects: (fit.randomEffects[ASSESSOR] ?? []).map((effect) => ({ assessor: effect.level, blup: effect.blup, condSD: effect.condSD })),
  };
  return { json, diagnostics: { ...fit.diagnostics, balancedFastPath: fastPath }, withInteraction, fit };
}

interface ClosedForm {
  theta: Float64Array;
  /** Denominator mean square and its df of the product F-test. */
  denominatorMeanSquare: number;
  denominatorDf: number;
}

/**
 * The REML solution of a balanced session in closed form (methods notes §1.2–1.3): the ANOVA
 * estimates when all are positive; with one negative estimate, that component at 0 and the
 * ANOVA estimates of the model without it (its sum of squares pooled into the line below).
 * Null when no closed form applies (two negative estimates, or a pooled estimate not positive).
 */
function balancedClosedForm(anova: BalancedAnova, withInteraction: boolean): ClosedForm | null {
  const { nReplicates: n, nProducts: p } = anova;
  const ssA = anova.msAssessor * anova.dfAssessor;
  const ssAP = anova.msInteraction * anova.dfInteraction;
  if (withInteraction) {
    const residual = anova.msError;
    if (!(residual > 0)) return null;
    const interaction = (anova.msInteraction - anova.msError) / n;
    const assessor = (anova.msAssessor - anova.msInteraction) / (n * p);
    if (interaction > 0 && assessor > 0) {
      return {
        theta: Float64Array.of(Math.sqrt(assessor / residual), Math.sqrt(interaction / residual)),
        denominatorMeanSquare: anova.msInteraction,
        denominatorDf: anova.dfInteraction,
      };
    }
    if (!(interaction > 0) && assessor > 0) {
      // Interaction at 0: error and interaction lines pooled.
      const dfPooled = anova.dfInteraction + anova.dfError;
      const pooled = (ssAP + anova.msError * anova.dfError) / dfPooled;
      const pooledAssessor = (anova.msAssessor - pooled) / (n * p);
      if (!(pooledAssessor > 0)) return null;
      return { theta: Float64Array.of(Math.sqrt(pooledAssessor / pooled), 0), denominatorMeanSquare: pooled, denominatorDf: dfPooled };
    }
    if (interaction > 0 && !(assessor > 0)) {
      // Assessor at 0: assessor and interaction lines pooled.
      const dfPooled = anova.dfAssessor + anova.dfInteraction;
      const pooled = (ssA + ssAP) / dfPooled;
      const pooledInteraction = (pooled - residual) / n;
      if (!(pooledInteraction > 0)) return null;
      return { theta: Float64Array.of(0, Math.sqrt(pooledInteraction / residual)), denominatorMeanSquare: pooled, denominatorDf: dfPooled };
    }
    return null;
  }
  if (n !== 1) return null;
  const residual = anova.msInteraction;
  if (!(residual > 0)) return null;
  const assessor = (anova.msAssessor - anova.msInteraction) / p;
  if (assessor > 0) {
    return { theta: Float64Array.of(Math.sqrt(assessor / residual)), denominatorMeanSquare: residual, denominatorDf: anova.dfInteraction };
  }
  const dfPooled = anova.dfAssessor + anova.dfInteraction;
  return { theta: Float64Array.of(0), denominatorMeanSquare: (ssA + ssAP) / dfPooled, denominatorDf: dfPooled };
}

function closedFormProductTest(anova: BalancedAnova, closedForm: ClosedForm): ProductTest {
  const F = anova.msProduct / closedForm.denominatorMeanSquare;
  const denDf = closedForm.denominatorDf;
  return { F, numDf: anova.dfProduct, denDf, pValue: fUpperTail(F, anova.dfProduct, denDf), nuPerContrast: [denDf], messages: [] };
}

/** ANOVA-type start values, kept away from the boundary so every direction is explored. */
function startTheta(anova: BalancedAnova | null, withInteraction: boolean): number[] {
  if (!anova) return withInteraction ? [0.5, 0.5] : [0.5];
  const n = anova.nReplicates;
  const residual = withInteraction ? anova.msError : anova.msInteraction;
  if (!(residual > 0)) return withInteraction ? [0.5, 0.5] : [0.5];
  const clip = (variance: number): number => Math.sqrt(Math.max(variance / residual, 0.01));
  if (!withInteraction) return [clip((anova.msAssessor - anova.msInteraction) / anova.nProducts)];
  return [clip((anova.msAssessor - anova.msInteraction) / (n * anova.nProducts)), clip((anova.msInteraction - anova.msError) / n)];
}

/** True when some assessor × product cell holds more than one rating. */
function hasReplicatedCell(assessors: string[], products: string[]): boolean {
  const byAssessor = new Map<string, Set<string>>();
  for (let i = 0; i < assessors.length; i++) {
    let seen = byAssessor.get(assessors[i]);
    if (!seen) byAssessor.set(assessors[i], (seen = new Set()));
    if (seen.has(products[i])) return true;
    seen.add(products[i]);
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
