export { estimateBaseline, D2_MOVING_RANGE_OF_TWO, type Baseline, type BaselineOptions, type BaselineStatus, type BaselineReason } from './baseline.js';
export { ewmaChart, ewmaArl, ewmaLimitForArl0, type EwmaDesign, type EwmaChart, type EwmaPoint } from './ewma.js';
export { cusumChart, cusumArl, cusumArlOneSided, cusumIntervalForArl0, siegmundArl, siegmundArlOneSided, type CusumDesign, type CusumChart, type CusumPoint, type CusumSignal } from './cusum.js';
export { individualsChart, createRuleState, updateRules, type WesternElectricRule, type IndividualsPoint, type RuleState } from './shewhart.js';
export { ewmaLimitForUnconditionalArl0, unconditionalFalseAlarmRate, movingRangeDf } from './unconditional.js';
export {
  monitorSeries,
  standardiseSegments,
  targetArl0ForChartSet,
  type SeriesPoint,
  type SegmentOptions,
  type Segment,
  type StandardisedPoint,
  type ChartDesigns,
  type MonitoredPoint,
  type MonitoredSegment,
} from './chart.js';
export * from './series.js';
export { sessionProductEffects, cochranQ, productRankConcordance, type SessionProductEffect, type CochranQ } from './stability.js';
