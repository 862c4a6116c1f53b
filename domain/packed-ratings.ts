/**
 * Every stored rating of a panel in columns: name tables plus typed arrays of indices into them.
 * A year of a large panel is ~10⁵ ratings; as columns it loads without joins and crosses to a
 * worker thread as a few memory copies instead of 10⁵ cloned objects.
 */
export interface PackedRatings {
  sessions: { label: string; date: string }[];
  assessors: string[];
  products: string[];
  attributes: string[];
  /** Distinct sample codes; codeIndex −1 = no code. */
  codes: string[];
  sessionIndex: Int32Array;
  assessorIndex: Int32Array;
  productIndex: Int32Array;
  attributeIndex: Int32Array;
  codeIndex: Int32Array;
  replicate: Int32Array;
  value: Float64Array;
}
