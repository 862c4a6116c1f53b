/** Types shared by every stage. No logic lives in domain/. */

/** How a file reached the store. */
export type ImportSource = 'cli' | 'http' | 'web';

/** A rating scale (line scale end points), in scale units. */
export interface ScaleRange {
  min: number;
  max: number;
}

/** The part of a rating the models and indices need. */
export interface Observation {
  session: string;
  assessor: string;
  product: string;
  /** 1-based replicate within the session. */
  replicate: number;
  attribute: string;
  value: number;
}

/**
 * The ratings of one (session, attribute) group as parallel arrays: what a session fit and the
 * analyze indices read, built without an object per rating.
 */
export interface RatingGroup {
  session: string;
  attribute: string;
  values: number[];
  /** Each rating's assessor and product as an id into the name list (ids need not be dense within the group). */
  assessorIds: Int32Array;
  productIds: Int32Array;
  assessorNames: readonly string[];
  productNames: readonly string[];
}

/**
 * Ratings as columns: each key an id into its name list (ids in first-seen order), the replicate
 * number itself, the value. The analyze command's form of a file (no object per rating).
 */
export interface RatingColumns {
  n: number;
  session: Int32Array;
  attribute: Int32Array;
  assessor: Int32Array;
  product: Int32Array;
  replicate: Int32Array;
  value: Float64Array;
  sessionNames: readonly string[];
  attributeNames: readonly string[];
  assessorNames: readonly string[];
  productNames: readonly string[];
}

/** One validated rating: what is stored and what export writes (long form). */
export interface Rating extends Observation {
  /** Session date, YYYY-MM-DD. */
  date: string;
  /** Blind sample code served, when the file has one. */
  code: string | null;
}

/** The columns of the long form, in export order. */
export const LONG_COLUMNS = ['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value', 'code'] as const;
