/**
 * The one-session model through the general machinery (model frame → criterion → optimiser →
 * result, fit.ts): the full LmmFit with its diagnostics, for callers that read `.fit` or ask for
 * diagnostics, and the path of sessions neither the closed form nor the cell summaries answer.
 */
import { makeRemlObjective } from './criterion.js';
import { LmmFitError } from './errors.js';
import { reproducedExactly } from './exact-fit.js';
import { assembleFit, confirmClosedForm, fitFromObjective, optimumInput, type LmmDiagnostics, type LmmFit } from './fit.js';
import { buildModelFrame } from './model-frame.js';
import type { BalancedAnova } from './balanced-anova.js';
import { CELL_SUMS_OPTIMIZER_NAME } from './session-cells-fit.js';
import { noResidualVariation } from './session-checks.js';
import { closedFormProductTest, startTheta, type ClosedForm } from './session-closed-form.js';
import { makeSessionCriterion } from './session-criterion.js';
import { makeSessionSecondOrder } from './session-criterion-hessian.js';
import { minimizeSessionNewton } from './session-newton.js';

export const ASSESSOR = 'assessor';
export const ASSESSOR_PRODUCT = 'assessor:product';
export const SESSION_LEVELS = 'assessor and product';

export interface SessionModelDiagnostics extends LmmDiagnostics {
  /** True when the balanced closed form was used. */
  balancedFastPath: boolean;
}

export interface SessionCells {
  assessorCodes: Int32Array;
  productCodes: Int32Array;
  nAssessors: number;
  nProducts: number;
}

/** The four stages; the closed form, when there is one, as the start to confirm. */
export function fitThroughFrame(
  values: number[],
  assessors: string[],
  products: string[],
  attribute: string,
  withInteraction: boolean,
  anova: BalancedAnova | null,
  closedForm: ClosedForm | null,
  cells: SessionCells,
): { fit: LmmFit; diagnostics: SessionModelDiagnostics } {
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
  let fit: LmmFit;
  let fastPath = false;
  try {
    if (anova && closedForm) {
      const confirmed = confirmClosedForm(objective, closedForm.theta, closedFormProductTest(anova, closedForm), [ASSESSOR]);
      fit = confirmed.fit;
      fastPath = confirmed.confirmed;
    } else {
      // The search runs on the cell-sum form of the same criterion (a few evaluations at
      // O(A·P²)–O(A·P³) each); the frame's objective assembles the answer once at the optimum.
      const searchCriterion = makeSessionCriterion(values, cells.assessorCodes, cells.productCodes, cells.nAssessors, cells.nProducts, withInteraction);
      if (anova) {
        // Balanced without a closed form: the quasi-Newton search from ANOVA-type start values.
        fit = fitFromObjective(objective, { startTheta: startTheta(anova, withInteraction), randomEffectTerms: [ASSESSOR], searchCriterion });
      } else {
        // Unbalanced: the same Newton steps from the same moment start as the cell-sum JSON, so
        // the LmmFit and the JSON describe one optimum.
        const start = searchCriterion.momentStart();
        const optimum = minimizeSessionNewton(makeSessionSecondOrder(searchCriterion), start);
        // Should Newton fail (a criterion not finite at the start), the quasi-Newton search with its face search.
        fit = !optimum.converged ? fitFromObjective(objective, { startTheta: start, randomEffectTerms: [ASSESSOR], searchCriterion }) : assembleFit(objective, optimumInput(optimum, CELL_SUMS_OPTIMIZER_NAME), { randomEffectTerms: [ASSESSOR] });
      }
    }
  } catch (error) {
    if (!(error instanceof LmmFitError) && reproducedExactly(frame)) throw noResidualVariation(SESSION_LEVELS);
    throw error;
  }
  const nAssessors = frame.terms[0].levels.length;
  if (nAssessors < 3) fit.diagnostics.messages.push(`too few assessors (${nAssessors}): the assessor variance is poorly determined`);
  return { fit, diagnostics: { ...fit.diagnostics, balancedFastPath: fastPath } };
}
