/**
 * The JSON contract of `panel-steward analyze --format json`. Field names are a
 * contract with other tools: do not rename. Numbers at full precision; null where undefined.
 */

export interface ProductTestJson {
  F: number | null;
  numDf: number;
  denDf: number | null;
  p: number | null;
}

export interface ProductMeanJson {
  product: string;
  mean: number;
  se: number;
}

export interface AssessorEffectJson {
  assessor: string;
  blup: number;
  condSD: number;
}

/** Variances (not SDs). Period fits add session, assessor:session, product:session. */
export interface VarianceJson {
  assessor: number;
  'assessor:product': number | null;
  residual: number;
  session?: number;
  'assessor:session'?: number;
  'product:session'?: number;
}

export interface FitJson {
  session: string | null;
  attribute: string;
  model: 'session' | 'period';
  n: number;
  assessors: number;
  products: number;
  variance: VarianceJson;
  remlCriterion: number;
  productTest: ProductTestJson;
  productMeans: ProductMeanJson[];
  assessorEffects: AssessorEffectJson[];
}

export interface AssessorIndicesJson {
  session: string;
  attribute: string;
  assessor: string;
  offset: number | null;
  discriminationF: number | null;
  discriminationP: number | null;
  repeatabilityMSE: number | null;
  agreementR: number | null;
  scaling: number | null;
}

/**
 * A group (session × attribute, or an attribute over the period) that has no fit, and why. Its
 * assessor indices are still in `assessorIndices`.
 */
export interface NotFittedJson {
  session: string | null;
  attribute: string;
  model: 'session' | 'period';
  status: 'not-fitted';
  /**
   * Why, for programs: a data condition ("no-residual-variation", "constant-response",
   * "too-few-assessors", "too-few-sessions", "too-few-observations", "not-finite") or
   * "fit-failed" (an unexpected fault of the program, reported on stderr).
   */
  code: string;
  /** Why, for people: a plain sentence. */
  reason: string;
}

export interface AnalyzeJson {
  fits: FitJson[];
  assessorIndices: AssessorIndicesJson[];
  /** Groups without a fit; present only when there is one, so the output of a file where everything fits is unchanged. */
  notFitted?: NotFittedJson[];
}

/** A period (rolling-window) fit of one attribute, as the refit stores it. */
export interface PeriodFitResult {
  json: FitJson;
  diagnostics: unknown;
  /** Boundary likelihood-ratio test of product:session (null when not made). */
  lrt: { likelihoodRatio: number; pValue: number } | null;
  /** Relative SDs of the LRT's fit without product:session, by term (a warm start for later refits). */
  reducedRelativeSds?: Record<string, number> | null;
}

/** What a stored period fit holds: the period fit, or the sentence saying why there is none. */
export type StoredPeriodResult = PeriodFitResult | { problem: string };

/**
 * A session × attribute fit that could not be made, as the refit stores it with the session's
 * results (`code` as in NotFittedJson, `message` the plain sentence).
 */
export interface SessionFitFinding {
  code: string;
  session: string;
  attribute: string;
  message: string;
}
