/**
 * Speed of the flag engine (goal: a year of 52 sessions × 10 attributes × 12 assessors, flags
 * in well under a second). History: seeded synthetic indices (test/analysis/flags/helpers) plus
 * 62 400 seeded ratings for the data-quality checks. Reports the first call in a fresh process
 * (includes sizing the chart limits, kept in the caller's sizing memo afterwards), the median of warm calls, and the call
 * after adding one session. Run: `npx tsx bench/flags-bench.ts`.
 */
import { buildFlags as build, createFlagsMemo, type PanelThresholds } from '../analysis/flags/index.js';
import { createChartSizingMemo } from '../analysis/monitor/sizing-memo.js';
import { syntheticYear as yearHistory } from '../test/analysis/flags/helpers/equality-histories.js';

const time = (f: () => unknown): number => {
  const start = performance.now();
  f();
  return performance.now() - start;
};
const median = (v: number[]) => [...v].sort((a, b) => a - b)[v.length >> 1];

// One memo of each kind for the run, as the refit's flags phase keeps them per worker thread.
const memo = createFlagsMemo();
const sizingMemo = createChartSizingMemo();
const buildFlags = (history: Parameters<typeof build>[0], settings?: PanelThresholds) => build(history, settings, { memo, sizingMemo });

const year = yearHistory(52);
const previous = yearHistory(51);
const cold = time(() => buildFlags(year));
// New ratings (nothing memoised for them) with the chart sizing already done in this process.
const freshRatings = yearHistory(52, 50_000);
const fresh = time(() => buildFlags(freshRatings));
const warm = median(Array.from({ length: 7 }, () => time(() => buildFlags(year))));
const withoutRatings = median(Array.from({ length: 7 }, () => time(() => buildFlags({ ...year, ratings: [] }))));
time(() => buildFlags(previous));
const incremental = median(Array.from({ length: 5 }, () => time(() => buildFlags(year))));
const nFlags = buildFlags(year).length;

console.log('| measurement (52 sessions × 10 attributes × 12 assessors, 62 400 ratings) | ms |');
console.log('| --- | --- |');
console.log(`| first call in a fresh process (chart sizing included) | ${cold.toFixed(0)} |`);
console.log(`| new data, chart sizing already memoised in the process | ${fresh.toFixed(0)} |`);
console.log(`| same history again (per-session data-quality results memoised), median of 7 | ${warm.toFixed(0)} |`);
console.log(`| warm call without ratings (no data-quality checks), median of 7 | ${withoutRatings.toFixed(0)} |`);
console.log(`| after adding session 52 to a 51-session history, median of 5 | ${incremental.toFixed(0)} |`);
console.log(`\n${nFlags} flags; Node ${process.version}.`);
