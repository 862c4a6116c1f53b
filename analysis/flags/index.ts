export { buildFlags, type BuildFlagsOptions } from './build-flags.js';
export { DEFAULT_THRESHOLDS, PanelThresholdsSchema, validateThresholds, type PanelThresholds, type ThresholdProblem } from './settings.js';
