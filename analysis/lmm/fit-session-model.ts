/**
 * The per-session, per-attribute model (methods §1.1):
 *   value ~ product + (1|assessor) + (1|assessor:product)   when some assessor × product cell has > 1 value,
 *   value ~ product + (1|assessor)                           otherwise (the interaction is then the error).
 * Stages, each in its own file: checks and level codes (session-checks.ts); balanced sessions
 * answer in closed form (session-closed-form.ts); unbalanced ones from their cell summaries with
 * Newton steps (session-cells-fit.ts); the general machinery (session-general-fit.ts), whose
 * optimiser confirms the closed form, runs only when the caller asks for diagnostics
 * (`withDiagnostics`) or reads the LmmFit, or when neither fast path answers.
 */
import type { FitJson } from '../../domain/analysis.js';
import { LevelCoder } from '../../domain/level-coder.js';
import type { Observation, RatingGroup } from '../../domain/ratings.js';
import { balancedAnova } from './balanced-anova.js';
import { LmmFitError } from './errors.js';
import type { LmmFit } from './fit.js';
import { fitSessionCells, type SessionCellsFit } from './session-cells-fit.js';
import { checkOneGroup, checkReplicateVariation, checkResidualVariation, checkResponse, codeIds, hasReplicatedCell } from './session-checks.js';
import { balancedClosedForm, closedFormJson } from './session-closed-form.js';
import { makeSessionCriterion } from './session-criterion.js';
import { ASSESSOR, ASSESSOR_PRODUCT, fitThroughFrame, SESSION_LEVELS, type SessionModelDiagnostics } from './session-general-fit.js';

// The checks are shared with the period model.
export { checkOneGroup, checkResidualVariation, checkResponse, noResidualVariation, RESIDUAL_VARIANCE_FLOOR } from './session-checks.js';
export { exceeds, MEAN_SQUARE_TIE_ULPS } from './session-closed-form.js';
export { ASSESSOR, ASSESSOR_PRODUCT, type SessionModelDiagnostics } from './session-general-fit.js';

export interface SessionModelOptions {
  /**
   * Run the general machinery (model frame, criterion, optimiser confirming the gradient) even
   * when the closed form answers, for its diagnostics. Off (the default): a closed-form fit has
   * `diagnostics: null`, at about a seventh of the time on a small session.
   */
  withDiagnostics?: boolean;
}

export interface SessionModelFit {
  json: FitJson;
  /** null when the closed form answered and diagnostics were not asked for. */
  diagnostics: SessionModelDiagnostics | null;
  /** True for value ~ product + (1|assessor) + (1|assessor:product). */
  withInteraction: boolean;
  fit: LmmFit;
}

export function fitSessionModel(observations: Observation[], options: SessionModelOptions = {}): SessionModelFit {
  const { session, attribute } = checkOneGroup(observations);
  const values = observations.map((row) => row.value);
  const assessorCoder = new LevelCoder<string>();
  const productCoder = new LevelCoder<string>();
  const assessorIds = Int32Array.from(observations, (row) => assessorCoder.code(row.assessor));
  const productIds = Int32Array.from(observations, (row) => productCoder.code(row.product));
  return fitSessionGroup({ session: session!, attribute, values, assessorIds, productIds, assessorNames: assessorCoder.names, productNames: productCoder.names }, options);
}

/** fitSessionModel on a group already taken from one session and attribute (the analyze path). */
export function fitSessionGroup(group: RatingGroup, options: SessionModelOptions = {}): SessionModelFit {
  const { session, attribute, values } = group;
  checkResponse(values);
  const assessorCoding = codeIds(group.assessorIds, group.assessorNames);
  const nAssessors = assessorCoding.levels.length;
  if (nAssessors < 2) throw new LmmFitError('too-few-assessors', `only ${nAssessors} assessor rated ${attribute}: a panel model needs at least 2`);
  const productCoding = codeIds(group.productIds, group.productNames);
  const nProducts = productCoding.levels.length;

  // With one product the interaction would duplicate the assessor term (not identifiable).
  const withInteraction = nProducts > 1 && hasReplicatedCell(assessorCoding.codes, productCoding.codes, nProducts);
  if (withInteraction) checkReplicateVariation(values, assessorCoding.codes, productCoding.codes, nAssessors, nProducts);
  // Level codes in sorted order, as the model frame codes them, so the ANOVA is the frame's.
  const anova = nProducts > 1 ? balancedAnova(values, assessorCoding.codes, productCoding.codes, nAssessors, nProducts) : null;
  const closedForm = anova ? balancedClosedForm(anova, withInteraction) : null;
  const cells = { assessorCodes: assessorCoding.codes, productCodes: productCoding.codes, nAssessors, nProducts };
  const general = (): { fit: LmmFit; diagnostics: SessionModelDiagnostics } => {
    const assessors = Array.from(group.assessorIds, (id) => group.assessorNames[id]);
    const products = Array.from(group.productIds, (id) => group.productNames[id]);
    return fitThroughFrame(values, assessors, products, attribute, withInteraction, anova, closedForm, cells);
  };

  if (anova && closedForm && closedForm.variances.residual > 0) {
    checkResidualVariation(closedForm.variances.residual, values, SESSION_LEVELS);
    // The closed form is the REML solution (module comment), so the JSON needs no model frame,
    // criterion or optimiser: about 0.6 s less for a year of sessions. The general machinery
    // (its confirmation and diagnostics) runs when asked for, or when the LmmFit is read.
    const json = closedFormJson(session, attribute, anova, closedForm, withInteraction, assessorCoding.levels, productCoding.levels);
    if (options.withDiagnostics) return { json, withInteraction, ...general() };
    let completed: LmmFit | null = null;
    return {
      json,
      withInteraction,
      diagnostics: null,
      get fit() {
        return (completed ??= general().fit);
      },
    };
  }
  if (!anova && values.length > nProducts) {
    // Unbalanced (missing ratings, empty cells, a new assessor): fitted from the cell summaries;
    // the general machinery runs only when someone asks for the LmmFit.
    const criterion = makeSessionCriterion(values, cells.assessorCodes, cells.productCodes, nAssessors, nProducts, withInteraction);
    const fast = fitSessionCells(criterion, criterion.momentStart(), productCounts(cells.productCodes, nProducts));
    if (fast) {
      checkResidualVariation(fast.residualVariance, values, SESSION_LEVELS);
      const diagnostics: SessionModelDiagnostics = { ...fast.diagnostics, balancedFastPath: false };
      if (nAssessors < 3) diagnostics.messages.push(`too few assessors (${nAssessors}): the assessor variance is poorly determined`);
      let completed: LmmFit | null = null;
      return {
        json: cellsFitJson(session, attribute, fast, withInteraction, values.length, assessorCoding.levels, productCoding.levels),
        diagnostics,
        withInteraction,
        get fit() {
          return (completed ??= general().fit);
        },
      };
    }
  }
  const { fit, diagnostics } = general();
  checkResidualVariation(fit.residualVariance, values, SESSION_LEVELS);
  const json: FitJson = {
    session,
    attribute,
    model: 'session',
    n: fit.frame.nObservations,
    assessors: nAssessors,
    products: fit.frame.nFixed,
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
  return { json, diagnostics, withInteraction, fit };
}

function cellsFitJson(
  session: string | null,
  attribute: string,
  fit: SessionCellsFit,
  withInteraction: boolean,
  nObservations: number,
  assessorLevels: string[],
  productLevels: string[],
): FitJson {
  return {
    session,
    attribute,
    model: 'session',
    n: nObservations,
    assessors: assessorLevels.length,
    products: productLevels.length,
    variance: { assessor: fit.assessorVariance, 'assessor:product': withInteraction ? fit.interactionVariance : null, residual: fit.residualVariance },
    remlCriterion: fit.criterion,
    productTest: { F: fit.productTest.F, numDf: fit.productTest.numDf, denDf: fit.productTest.denDf, p: fit.productTest.pValue },
    productMeans: productLevels.map((product, j) => ({ product, mean: fit.productMeans[j].mean, se: fit.productMeans[j].se })),
    assessorEffects: assessorLevels.map((assessor, a) => ({ assessor, blup: fit.assessorEffects[a].blup, condSD: fit.assessorEffects[a].condSD })),
  };
}

function productCounts(productCodes: Int32Array, nProducts: number): Float64Array {
  const counts = new Float64Array(nProducts);
  for (let i = 0; i < productCodes.length; i++) counts[productCodes[i]]++;
  return counts;
}

