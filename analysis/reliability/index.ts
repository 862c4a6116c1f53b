export { twoWayMeanSquares, type TwoWayMeanSquares } from './two-way-mean-squares.js';
export { shroutFleissIcc, type IccEstimate, type IccForm, type ShroutFleissResult } from './shrout-fleiss-icc.js';
export { cronbachAlpha } from './cronbach-alpha.js';
export { kendallW, type KendallWOptions, type KendallWResult } from './kendall-w.js';
export {
  assessorsNeeded,
  generalizabilityCoefficients,
  productVarianceFromMeanSquares,
  type GeneralizabilityResult,
  type VarianceComponentsForReliability,
} from './generalizability.js';
export { seededRandom } from './seeded-random.js';
export { productMeanReliability, type ProductMeanReliability } from './product-mean-reliability.js';
