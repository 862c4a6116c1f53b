export { sessionData, interactionMeanSquare, cellMeans, type SessionData, type QualityAttribute } from './session-data.js';
export { assessorResidualSpreads, detectSwappedCodes, SWAP_HISTORY_SESSIONS, type ResidualSpread, type SwapFinding } from './swapped-codes.js';
export {
  checkStraightLining,
  checkClipping,
  checkMissingCells,
  checkInRangeDecimalShift,
  resolutionOf,
  type StraightLiningFinding,
  type StraightLiningSummary,
  type ClippingFinding,
  type MissingCellsFinding,
  type DecimalShiftFinding,
} from './rating-checks.js';
