/**
 * The per-session, per-attribute model (methods §1.1):
 *   value ~ product + (1|assessor) + (1|assessor:product)   when some assessor × product cell has > 1 value,
 *   value ~ product + (1|assessor)                           otherwise (the interaction is then the error).
 * Balanced sessions take the closed-form fast path when one exists. The REML criterion of a
 * balanced session is a sum over orthogonal strata, Σ df (log λ + MS/λ), in the expected mean
 * squares λ_A ≥ λ_AP ≥ λ_E (see closedFormJson), so its minimum under that order is the MS of
 * each stratum, pooling adjacent strata whose MS break the order (order-restricted estimation
 * of this kind of sum: pool adjacent violators). The JSON is then computed in closed form; the
 * general machinery, whose optimiser confirms the gradient, runs only when the caller asks for
 * diagnostics (`withDiagnostics`) or reads the LmmFit.
 */
import type { FitJson } from '../../domain/analysis.js';
import { LevelCoder } from '../../domain/level-coder.js';
import type { Observation } from '../../domain/ratings.js';
import { fUpperTail } from '../distributions/index.js';
import { balancedAnova, type BalancedAnova } from './balanced-anova.js';
import { makeRemlObjective } from './criterion.js';
import { LmmFitError } from './errors.js';
import { reproducedExactly } from './exact-fit.js';
import { confirmClosedForm, fitFromObjective, type LmmDiagnostics, type LmmFit } from './fit.js';
import { buildModelFrame, compareLevels } from './model-frame.js';
import { fitSessionCells, type SessionCellsFit } from './session-cells-fit.js';
import { makeSessionCriterion } from './session-criterion.js';
import type { ProductTest } from './satterthwaite.js';

export interface SessionModelDiagnostics extends LmmDiagnostics {
  /** True when the balanced closed form was used. */
  balancedFastPath: boolean;
}

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

export const ASSESSOR = 'assessor';
const SESSION_LEVELS = 'assessor and product';
export const ASSESSOR_PRODUCT = 'assessor:product';

export function fitSessionModel(observations: Observation[], options: SessionModelOptions = {}): SessionModelFit {
  const { session, attribute } = checkOneGroup(observations);
  const values = observations.map((row) => row.value);
  checkResponse(values);
  const assessors = observations.map((row) => row.assessor);
  const products = observations.map((row) => row.product);
  const assessorCoding = codeLevels(assessors);
  const nAssessors = assessorCoding.levels.length;
  if (nAssessors < 2) throw new LmmFitError('too-few-assessors', `only ${nAssessors} assessor rated ${attribute}: a panel model needs at least 2`);
  const productCoding = codeLevels(products);
  const nProducts = productCoding.levels.length;

  // With one product the interaction would duplicate the assessor term (not identifiable).
  const withInteraction = nProducts > 1 && hasReplicatedCell(assessorCoding.codes, productCoding.codes, nProducts);
  if (withInteraction) checkReplicateVariation(values, assessorCoding.codes, productCoding.codes, nAssessors, nProducts);
  // Level codes in sorted order, as the model frame codes them, so the ANOVA is the frame's.
  const anova = nProducts > 1 ? balancedAnova(values, assessorCoding.codes, productCoding.codes, nAssessors, nProducts) : null;
  const closedForm = anova ? balancedClosedForm(anova, withInteraction) : null;
  const cells = { assessorCodes: assessorCoding.codes, productCodes: productCoding.codes, nAssessors, nProducts };
  const general = (): { fit: LmmFit; diagnostics: SessionModelDiagnostics } => fitThroughFrame(values, assessors, products, attribute, withInteraction, anova, closedForm, cells);

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
  if (!anova && observations.length > nProducts) {
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
        json: cellsFitJson(session, attribute, fast, withInteraction, observations.length, assessorCoding.levels, productCoding.levels),
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

/** The four stages (model frame → criterion → optimiser → result); the closed form, when there is one, as the start to confirm. */
function fitThroughFrame(
  values: number[],
  assessors: string[],
  products: string[],
  attribute: string,
  withInteraction: boolean,
  anova: BalancedAnova | null,
  closedForm: ClosedForm | null,
  cells: { assessorCodes: Int32Array; productCodes: Int32Array; nAssessors: number; nProducts: number },
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
      // The search runs on the cell-sum form of the same criterion (tens of evaluations at
      // O(A·P²) each); the frame's objective assembles the answer once at the optimum.
      const searchCriterion = makeSessionCriterion(values, cells.assessorCodes, cells.productCodes, cells.nAssessors, cells.nProducts, withInteraction);
      // Unbalanced sessions start from cell-means moments, as the cell-sum fit of their JSON does.
      const start = anova ? startTheta(anova, withInteraction) : searchCriterion.momentStart();
      fit = fitFromObjective(objective, { startTheta: start, randomEffectTerms: [ASSESSOR], searchCriterion });
    }
  } catch (error) {
    if (!(error instanceof LmmFitError) && reproducedExactly(frame)) throw noResidualVariation(SESSION_LEVELS);
    throw error;
  }
  const nAssessors = frame.terms[0].levels.length;
  if (nAssessors < 3) fit.diagnostics.messages.push(`too few assessors (${nAssessors}): the assessor variance is poorly determined`);
  return { fit, diagnostics: { ...fit.diagnostics, balancedFastPath: fastPath } };
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
function closedFormJson(
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
 * Sorted levels (code-unit order, as the model frame) and each value's level index. Codes are
 * given in first-seen order (consecutive ratings mostly repeat the assessor: compared before
 * hashing) and renumbered after sorting the few levels.
 */
function codeLevels(values: readonly string[]): { levels: string[]; codes: Int32Array } {
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

interface ClosedForm {
  theta: Float64Array;
  /** The variance estimates θ describes (interaction 0 in the model without it). */
  variances: { assessor: number; interaction: number; residual: number };
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
function hasReplicatedCell(assessorCodes: Int32Array, productCodes: Int32Array, nProducts: number): boolean {
  const seen = new Set<number>();
  for (let i = 0; i < assessorCodes.length; i++) {
    const cell = assessorCodes[i] * nProducts + productCodes[i];
    if (seen.has(cell)) return true;
    seen.add(cell);
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
function checkReplicateVariation(values: number[], assessorCodes: Int32Array, productCodes: Int32Array, nAssessors: number, nProducts: number): void {
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
