/**
 * The period model for one attribute over many sessions (methods §1.6):
 *   value ~ product + (1|assessor) + (1|session) + (1|assessor:product)
 *           + (1|assessor:session) + (1|product:session)
 * with an optional boundary likelihood-ratio test of product:session (instability of product
 * effects across sessions): LR = REMLcrit(without the term) − REMLcrit(full), p from the 50:50
 * mixture of χ²₀ and χ²₁ (Self & Liang 1987; Stram & Lee 1994).
 */
import type { FitJson, VarianceJson } from '../../domain/analysis.js';
import type { Observation } from '../../domain/ratings.js';
import { fUpperTail } from '../distributions/index.js';
import { boundaryLikelihoodRatioTest } from './boundary-lrt.js';
import { makeRemlObjective, type RemlObjective } from './criterion.js';
import { LmmFitError } from './errors.js';
import { confirmClosedForm, fitFromObjective, type LmmDiagnostics, type LmmFit } from './fit.js';
import { checkOneGroup, checkResidualVariation, checkResponse, noResidualVariation } from './fit-session-model.js';
import { reproducedExactly } from './exact-fit.js';
import { buildModelFrame } from './model-frame.js';
import { balancedPeriodSolution, periodMomentStart } from './period-start.js';

export interface PeriodModelFit {
  json: FitJson;
  diagnostics: LmmDiagnostics;
  productSessionLrt: { likelihoodRatio: number; pValue: number } | null;
  /** θ of the fit without product:session (the LRT's reduced fit) by term name: a later warm start. */
  reducedRelativeSds: Record<string, number> | null;
  fit: LmmFit;
}

export interface PeriodModelOptions {
  /** Include (1|product:session) and test it (default true). */
  withProductSession?: boolean;
  /**
   * Warm start: relative SDs θ = σ_term/σ_residual by term name (e.g. from the stored fit of the
   * previous latest window). Used only when the criterion there is below the criterion at the
   * default (moment) start, so a poor warm start cannot make the answer worse than a cold fit.
   */
  startRelativeSds?: Record<string, number>;
  /** Warm start of the LRT's reduced fit (its `reducedRelativeSds`), used on the same terms. */
  startReducedRelativeSds?: Record<string, number>;
}

/** θ_k = √(σ²_k/σ²) of each term from a fit's variances (the inverse of a fit's `variance` block). */
export function relativeSdsFromVariances(variance: VarianceJson): Record<string, number> | null {
  const residual = variance.residual;
  if (typeof residual !== 'number' || !(residual > 0)) return null;
  const relative: Record<string, number> = {};
  for (const [name, value] of Object.entries(variance) as [string, number | null | undefined][]) {
    if (name === 'residual' || typeof value !== 'number' || !(value >= 0)) continue;
    relative[name] = Math.sqrt(value / residual);
  }
  return relative;
}

const BASE_TERMS: string[][] = [['assessor'], ['session'], ['assessor', 'product'], ['assessor', 'session']];

export function fitPeriodModel(observations: Observation[], options: PeriodModelOptions = {}): PeriodModelFit {
  let withProductSession = options.withProductSession ?? true;
  const { attribute } = checkOneGroup(observations, false);
  const values = observations.map((row) => row.value);
  checkResponse(values);
  const columns = {
    assessor: observations.map((row) => row.assessor),
    product: observations.map((row) => row.product),
    session: observations.map((row) => row.session),
  };
  const nAssessors = new Set(columns.assessor).size;
  const nSessions = new Set(columns.session).size;
  if (nAssessors < 2) throw new LmmFitError('too-few-assessors', `only ${nAssessors} assessor rated ${attribute}: a panel model needs at least 2`);
  if (nSessions < 2) throw new LmmFitError('too-few-sessions', `only ${nSessions} session has ratings of ${attribute}: a period model needs at least 2`);
  // With one product, assessor:product and product:session would duplicate assessor and session.
  const oneProduct = new Set(columns.product).size < 2;
  if (oneProduct) withProductSession = false;
  const baseTerms = oneProduct ? BASE_TERMS.filter((term) => !term.includes('product')) : BASE_TERMS;
  const randomTerms = withProductSession ? [...baseTerms, ['product', 'session']] : baseTerms;
  const frame = buildModelFrame({ response: values, columns, fixedFactor: 'product', randomTerms });
  if (frame.nObservations <= frame.nFixed) {
    throw new LmmFitError('too-few-observations', `${frame.nObservations} ratings of ${attribute} are too few for ${frame.nFixed} products`);
  }
  const objective = makeRemlObjective(frame);
  const termIndex = (name: string): Int32Array => frame.terms[randomTerms.findIndex((term) => term.join(':') === name)].index;
  const cells = {
    values,
    assessor: termIndex('assessor'),
    product: frame.fixedIndex,
    session: termIndex('session'),
    nAssessors,
    nProducts: frame.nFixed,
    nSessions,
  };
  try {
    return fitPeriodFrame(objective, cells, { attribute, randomTerms, withProductSession, oneProduct, options });
  } catch (error) {
    if (!(error instanceof LmmFitError) && reproducedExactly(frame)) throw noResidualVariation(PERIOD_LEVELS);
    throw error;
  }
}

const PERIOD_LEVELS = 'assessor, product and session';

/** The fit itself, once the frame is built: closed form or REML, then the product:session LRT. */
function fitPeriodFrame(
  objective: RemlObjective,
  cells: Parameters<typeof periodMomentStart>[0],
  setting: { attribute: string; randomTerms: string[][]; withProductSession: boolean; oneProduct: boolean; options: PeriodModelOptions },
): PeriodModelFit {
  const { attribute, randomTerms, withProductSession, oneProduct, options } = setting;
  const { frame } = objective;
  const { nAssessors, nSessions } = cells;
  const { values } = cells;
  const momentStart = oneProduct ? null : periodMomentStart(cells, withProductSession);
  // Balanced with all components positive: closed form (confirmed by the optimiser); else REML.
  const closedForm = oneProduct ? null : balancedPeriodSolution(cells, withProductSession);
  let fit: LmmFit | null = null;
  if (closedForm) {
    const productTest = { F: closedForm.F, numDf: closedForm.numDf, denDf: closedForm.denDf, pValue: fUpperTail(closedForm.F, closedForm.numDf, closedForm.denDf), nuPerContrast: [closedForm.denDf], messages: [] };
    const confirmed = confirmClosedForm(objective, closedForm.theta, productTest, ['assessor']);
    fit = confirmed.fit;
  }
  fit ??= fitFromObjective(objective, { startTheta: chooseStart(objective, momentStart ?? randomTerms.map(() => 0.5), options.startRelativeSds),
    randomEffectTerms: ['assessor'],
    averageInformation: true,
  });
  checkResidualVariation(fit.residualVariance, values, PERIOD_LEVELS);
  if (nAssessors < 3) fit.diagnostics.messages.push(`too few assessors (${nAssessors}): the assessor variance is poorly determined`);

  let productSessionLrt: PeriodModelFit['productSessionLrt'] = null;
  let reducedRelativeSds: Record<string, number> | null = null;
  if (withProductSession) {
    // Balanced: the reduced model's closed form (or moment start) is its answer or close to it.
    // Otherwise the full fit's other components are the better start (only the product:session
    // variance has to be redistributed).
    const reducedStart = closedForm ? (balancedPeriodSolution(cells, false)?.theta ?? periodMomentStart(cells, false)) : null;
    const lrt = boundaryLikelihoodRatioTest(
      objective,
      { theta: fit.theta, criterion: fit.criterion },
      'product:session',
      reducedStart ?? undefined,
      options.startReducedRelativeSds && BASE_TERMS.map((term) => options.startReducedRelativeSds![term.join(':')]),
    );
    reducedRelativeSds = Object.fromEntries(BASE_TERMS.map((term, k) => [term.join(':'), lrt.reducedTheta[k]]));
    if (!lrt.reducedConverged) fit.diagnostics.messages.push('the fit without product:session did not converge: its likelihood ratio is unreliable');
    productSessionLrt = { likelihoodRatio: lrt.likelihoodRatio, pValue: lrt.pValue };
  }

  const variance: FitJson['variance'] = {
    assessor: fit.variances['assessor'],
    'assessor:product': oneProduct ? null : fit.variances['assessor:product'],
    residual: fit.residualVariance,
    session: fit.variances['session'],
    'assessor:session': fit.variances['assessor:session'],
  };
  if (withProductSession) variance['product:session'] = fit.variances['product:session'];
  const json: FitJson = {
    session: null,
    attribute,
    model: 'period',
    n: frame.nObservations,
    assessors: nAssessors,
    products: frame.nFixed,
    variance,
    remlCriterion: fit.criterion,
    productTest: { F: fit.productTest.F, numDf: fit.productTest.numDf, denDf: fit.productTest.denDf, p: fit.productTest.pValue },
    productMeans: fit.productMeans.map((mean) => ({ ...mean })),
    assessorEffects: (fit.randomEffects['assessor'] ?? []).map((effect) => ({ assessor: effect.level, blup: effect.blup, condSD: effect.condSD })),
  };
  return { json, diagnostics: fit.diagnostics, productSessionLrt, reducedRelativeSds, fit };
}

/**
 * The warm start when every term has a finite value there and the criterion is lower than at
 * the default start; otherwise the default start. Zeros are lifted a little off the boundary so
 * the optimiser can still move them.
 */
function chooseStart(objective: RemlObjective, defaultStart: number[], warm: Record<string, number> | undefined): number[] {
  if (!warm) return defaultStart;
  const warmStart = objective.frame.terms.map((term) => warm[term.name]);
  if (!warmStart.every((value) => typeof value === 'number' && Number.isFinite(value) && value >= 0)) return defaultStart;
  const lifted = warmStart.map((value) => Math.max(value, 0.01));
  // The default first: the objective keeps the last factor, so the optimiser's first evaluation
  // at the (usually chosen) warm start reuses it.
  const atDefault = objective.evaluate(defaultStart);
  return objective.evaluate(lifted) < atDefault ? lifted : defaultStart;
}
