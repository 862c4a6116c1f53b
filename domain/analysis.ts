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

export interface AnalyzeJson {
  fits: FitJson[];
  assessorIndices: AssessorIndicesJson[];
}
