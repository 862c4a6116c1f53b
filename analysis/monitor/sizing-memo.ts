/**
 * Sizing results kept between calls by the caller that owns them (a flag build, a worker, the
 * page memo), instead of module-level caches: the sizing functions stay pure, a fresh memo gives
 * the same numbers, and a caller that wants no memory passes none. Every entry is a pure function
 * of its key (λ, target ARL0, baseline length, spread floor, states).
 */
import type { JumpRule } from './jump.js';

export interface ChartSizingMemo {
  /** ewmaLimitForArl0: `λ|target|states` → L. */
  readonly ewmaLimits: Map<string, number>;
  /** cusumIntervalForArl0: `k|target|states` → h. */
  readonly cusumIntervals: Map<string, number>;
  /** ewmaLimitForUnconditionalArl0: `λ|target|nReference|floor` → L. */
  readonly unconditionalLimits: Map<string, number>;
  /** Quadrature nodes of the baseline's estimation error: `nReference|floor`. */
  readonly quadratureNodes: Map<string, { spreads: Float64Array; shifts: Float64Array }>;
  /** log ARL grids of λ other than the precomputed default. */
  readonly logArlGrids: Map<number, Float64Array[]>;
  /** jumpRule: `nAttributes|budget` → rule. */
  readonly jumpRules: Map<string, JumpRule>;
}

export function createChartSizingMemo(): ChartSizingMemo {
  return { ewmaLimits: new Map(), cusumIntervals: new Map(), unconditionalLimits: new Map(), quadratureNodes: new Map(), logArlGrids: new Map(), jumpRules: new Map() };
}

/** Entries beyond which a table stops growing (keys are few in practice; this only bounds odd inputs). */
const MAX_ENTRIES = 10_000;

/** The value for `key` from `table` (computed and kept when missing); computed afresh without a table. */
export function memoised<K, V>(table: Map<K, V> | undefined, key: K, compute: () => V): V {
  if (!table) return compute();
  const found = table.get(key);
  if (found !== undefined) return found;
  const value = compute();
  if (table.size < MAX_ENTRIES) table.set(key, value);
  return value;
}
