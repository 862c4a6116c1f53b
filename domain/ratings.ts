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

/** One validated rating: what is stored and what export writes (long form). */
export interface Rating extends Observation {
  /** Session date, YYYY-MM-DD. */
  date: string;
  /** Blind sample code served, when the file has one. */
  code: string | null;
}

/** The columns of the long form, in export order. */
export const LONG_COLUMNS = ['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value', 'code'] as const;
