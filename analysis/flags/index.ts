export { buildFlags, createFlagsMemo, type BuildFlagsOptions, type FlagsMemo } from './build-flags.js';
export { DEFAULT_THRESHOLDS, PanelThresholdsSchema, validateThresholds, type PanelThresholds, type ThresholdProblem } from './settings.js';
export { evaluateRetraining, welchOneSided, type RetrainingEvaluation, type RetrainingComparison, type RetrainingIndex, type WelchTest } from './retraining.js';
export { productEffectSeriesOf, productStepChartsOf, type ProductEffectSeries, type ProductStepChart } from './product-flags.js';
export { evaluateChart, chartSizing, assessorLevelCharts, type ChartSizing, type ChartSignal, type LevelChart, type AssessorLevelCharts } from './drift-flags.js';
