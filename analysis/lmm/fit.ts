/**
 * Stage 4 of a fit: the result object, with its diagnostics; and the composition of the
 * four stages (model frame → criterion → bounded optimiser → result) for any
 * variance-component model with random intercepts.
 */
import { makeRemlObjective, type MixedModelSolution, type RemlObjective } from './criterion.js';
import { buildModelFrame, type ModelFrame, type ModelFrameInput } from './model-frame.js';
import { minimizeBounded, type OptimiserControl, type OptimiserResult } from './optimise.js';
import { productContrastRows, productFTest, varparCovariance, type ProductTest } from './satterthwaite.js';

export interface LmmDiagnostics {
  converged: boolean;
  /** Some variance component is (numerically) zero: lme4's isSingular (θ < 1e-4). */
  singular: boolean;
  iterations: number;
  /** Criterion evaluations used by the optimiser. */
  evaluations: number;
  optimizer: string;
  messages: string[];
  /** Largest absolute projected gradient of the criterion with respect to γ = θ² at the answer. */
  gradientMaxAbs: number;
}

export interface RandomEffectEstimate {
  level: string;
  /** Conditional mode (BLUP), data scale. */
  blup: number;
  /** Conditional SD, as lme4's ranef(condVar = TRUE). */
  condSD: number;
}

export interface ProductMean {
  product: string;
  mean: number;
  se: number;
}

export interface LmmFit {
  frame: ModelFrame;
  reml: boolean;
  /** Relative SDs θ_k = σ_k/σ, in term order. */
  theta: Float64Array;
  residualVariance: number;
  /** Variance of each random term, by term name (e.g. "assessor:product"). */
  variances: Record<string, number>;
  /** REMLcrit (REML) or deviance (ML) on lme4's scale. */
  criterion: number;
  beta: Float64Array;
  covBeta: Float64Array;
  productTest: ProductTest;
  productMeans: ProductMean[];
  randomEffects: Record<string, RandomEffectEstimate[]>;
  diagnostics: LmmDiagnostics;
}

export interface OptimumInput {
  theta: Float64Array;
  iterations: number;
  evaluations: number;
  converged: boolean;
  gradientMaxAbs: number;
  optimizer: string;
  messages: string[];
}

export interface AssembleOptions {
  /** Skip the numerical Satterthwaite computation and use this test (balanced closed form). */
  productTest?: ProductTest;
  /** Terms whose conditional modes are wanted (default: all). */
  randomEffectTerms?: string[];
}

/** Singular-fit threshold on θ, as lme4's isSingular(tol = 1e-4). */
export const SINGULAR_THETA_TOLERANCE = 1e-4;

export function assembleFit(objective: RemlObjective, optimum: OptimumInput, options: AssembleOptions = {}): LmmFit {
  const { frame } = objective;
  const solution: MixedModelSolution = objective.solve(optimum.theta);
  const p = frame.nFixed;
  const sigma2 = solution.sigma * solution.sigma;
  const covBeta = Float64Array.from(solution.unscaledCovBeta, (value) => value * sigma2);
  const messages = [...optimum.messages];

  let productTest = options.productTest;
  if (!productTest) {
    const contrasts = productContrastRows(frame.xTx, p);
    const varpar = contrasts.length > 0 ? varparCovariance(objective, solution.theta, solution.sigma) : null;
    if (varpar && varpar.hessianEigenvalues.some((value) => value < -1e-8)) {
      messages.push('the Hessian of the criterion has a negative eigenvalue: the fit may not be at a minimum');
    }
    productTest = productFTest(solution.beta, covBeta, contrasts, varpar);
  }
  messages.push(...productTest.messages);

  const productMeans: ProductMean[] = frame.fixedLevels.map((product, level) => {
    let mean = solution.beta[0];
    let variance = covBeta[0];
    if (level > 0) {
      mean += solution.beta[level];
      variance += covBeta[level * p + level] + 2 * covBeta[level];
    }
    return { product, mean, se: Math.sqrt(variance) };
  });

  const variances: Record<string, number> = {};
  const randomEffects: Record<string, RandomEffectEstimate[]> = {};
  frame.terms.forEach((term, k) => {
    variances[term.name] = solution.theta[k] * solution.theta[k] * sigma2;
    if (options.randomEffectTerms && !options.randomEffectTerms.includes(term.name)) return;
    const conditional = solution.conditionalVariances(k);
    randomEffects[term.name] = term.levels.map((level, index) => ({
      level,
      blup: solution.randomEffects[k][index],
      condSD: Math.sqrt(conditional[index]),
    }));
  });

  const singular = [...solution.theta].some((value) => value < SINGULAR_THETA_TOLERANCE);
  if (singular) messages.push('singular fit: some variance component is estimated as zero');
  return {
    frame,
    reml: objective.reml,
    theta: solution.theta,
    residualVariance: sigma2,
    variances,
    criterion: solution.deviance,
    beta: solution.beta,
    covBeta,
    productTest,
    productMeans,
    randomEffects,
    diagnostics: {
      converged: optimum.converged,
      singular,
      iterations: optimum.iterations,
      evaluations: optimum.evaluations,
      optimizer: optimum.optimizer,
      messages,
      gradientMaxAbs: optimum.gradientMaxAbs,
    },
  };
}

export interface FitOptions {
  reml?: boolean;
  /** Start values of θ (relative SDs); default 0.5 for every term. */
  startTheta?: number[];
  control?: Partial<OptimiserControl>;
  randomEffectTerms?: string[];
  /** Steer the optimiser with the average-information Hessian instead of Hessians from differences. */
  averageInformation?: boolean;
  /**
   * The same criterion as the objective's, in a cheaper form for this design (e.g. the session
   * model's cell-sum form), for the search; the answer is still assembled from the objective.
   */
  searchCriterion?: Pick<RemlObjective, 'evaluate' | 'valueAndGradient'>;
}

export const OPTIMIZER_NAME = 'projected-bfgs(gamma)';

/** Optimises the criterion from the start values and assembles the result. */
export function fitFromObjective(objective: RemlObjective, options: FitOptions = {}): LmmFit {
  const start = options.startTheta ?? objective.frame.terms.map(() => 0.5);
  const search = options.searchCriterion ?? objective;
  const optimum = minimizeBounded(search.evaluate, start, options.control, search.valueAndGradient, {
    approximateHessian: options.averageInformation ? objective.averageInformation : undefined,
  });
  return assembleFit(objective, optimumInput(optimum, OPTIMIZER_NAME), { randomEffectTerms: options.randomEffectTerms });
}

/** An optimiser's result as assembleFit takes it. */
export function optimumInput(optimum: OptimiserResult, optimizer: string): OptimumInput {
  return {
    theta: optimum.theta,
    iterations: optimum.iterations,
    evaluations: optimum.evaluations,
    converged: optimum.converged,
    gradientMaxAbs: Math.max(0, ...[...optimum.projectedGradient].map(Math.abs)),
    optimizer,
    messages: optimum.messages,
  };
}

/** The four stages composed: any intercept + fixed factor + random intercepts model. */
export function fitVarianceComponents(input: ModelFrameInput, options: FitOptions = {}): LmmFit {
  const frame = buildModelFrame(input);
  const objective = makeRemlObjective(frame, { reml: options.reml ?? true });
  return fitFromObjective(objective, options);
}

/**
 * Confirms a closed-form solution (balanced ANOVA) is a constrained minimum with one quasi-Newton
 * check of the projected gradient, and assembles it with the closed-form product test. If the
 * optimiser moves away from it, the optimiser's answer and the general inference are used.
 */
export function confirmClosedForm(
  objective: RemlObjective,
  theta: ArrayLike<number>,
  productTest: ProductTest,
  randomEffectTerms?: string[],
): { fit: LmmFit; confirmed: boolean } {
  const start = Float64Array.from(theta);
  const optimum = minimizeBounded(objective.evaluate, start, { maxComponentsForFaceSearch: 0 }, objective.valueAndGradient);
  const confirmed = optimum.converged && optimum.theta.every((value, k) => Math.abs(value - start[k]) <= 1e-6 * Math.max(1, start[k]));
  const fit = assembleFit(
    objective,
    {
      theta: confirmed ? start : optimum.theta,
      iterations: optimum.iterations,
      evaluations: optimum.evaluations,
      converged: optimum.converged,
      gradientMaxAbs: Math.max(0, ...[...optimum.projectedGradient].map(Math.abs)),
      optimizer: confirmed ? `balanced-anova+${OPTIMIZER_NAME}` : OPTIMIZER_NAME,
      messages: optimum.messages,
    },
    { productTest: confirmed ? productTest : undefined, randomEffectTerms },
  );
  return { fit, confirmed };
}
