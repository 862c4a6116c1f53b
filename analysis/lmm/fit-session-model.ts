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
import { makeRemlObjective, type RemlObjective } from './criterion.js';
import { LmmFitError } from './errors.js';
import { assembleFit, fitFromObjective, OPTIMIZER_NAME, type LmmDiagnostics, type LmmFit } from './fit.js';
import { buildModelFrame } from './model-frame.js';
import { minimizeBounded } from './optimise.js';
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

  const cellCounts = new Map<string, number>();
  for (let i = 0; i < observations.length; i++) {
    const key = `${assessors[i]}\u0000${products[i]}`;
    cellCounts.set(key, (cellCounts.get(key) ?? 0) + 1);
  }
  const withInteraction = [...cellCounts.values()].some((count) => count > 1);
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
  const fastPath = anova ? fastPathTheta(anova, withInteraction) : null;

  let fit: LmmFit;
  if (anova && fastPath) {
    fit = confirmFastPath(objective, fastPath, closedFormProductTest(anova));
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
  return { json, diagnostics: { ...fit.diagnostics, balancedFastPath: fastPath !== null }, withInteraction, fit };
}

/** θ from the ANOVA estimates when all are positive, else null. */
function fastPathTheta(anova: BalancedAnova, withInteraction: boolean): Float64Array | null {
  const { nReplicates: n, nProducts: p } = anova;
  if (withInteraction) {
    const residual = anova.msError;
    const interaction = (anova.msInteraction - anova.msError) / n;
    const assessor = (anova.msAssessor - anova.msInteraction) / (n * p);
    if (!(residual > 0 && interaction > 0 && assessor > 0)) return null;
    return Float64Array.of(Math.sqrt(assessor / residual), Math.sqrt(interaction / residual));
  }
  if (n !== 1) return null;
  const residual = anova.msInteraction;
  const assessor = (anova.msAssessor - anova.msInteraction) / p;
  if (!(residual > 0 && assessor > 0)) return null;
  return Float64Array.of(Math.sqrt(assessor / residual));
}

function closedFormProductTest(anova: BalancedAnova): ProductTest {
  const F = anova.msProduct / anova.msInteraction;
  const denDf = anova.dfInteraction;
  return { F, numDf: anova.dfProduct, denDf, pValue: fUpperTail(F, anova.dfProduct, denDf), nuPerContrast: [denDf], messages: [] };
}

/** Confirms the ANOVA solution is stationary (one quasi-Newton check), then assembles with the closed-form test. */
function confirmFastPath(objective: RemlObjective, theta: Float64Array, productTest: ProductTest): LmmFit {
  const optimum = minimizeBounded(objective.evaluate, theta, { maxComponentsForFaceSearch: 0 }, objective.valueAndGradient);
  const gradientMaxAbs = Math.max(0, ...[...optimum.projectedGradient].map(Math.abs));
  return assembleFit(
    objective,
    {
      theta: optimum.theta,
      iterations: optimum.iterations,
      evaluations: optimum.evaluations,
      converged: optimum.converged,
      gradientMaxAbs,
      optimizer: `balanced-anova+${OPTIMIZER_NAME}`,
      messages: optimum.messages,
    },
    { productTest, randomEffectTerms: [ASSESSOR] },
  );
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
