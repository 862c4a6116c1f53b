/**
 * Unstable products (methods §3.7):
 * (a) the period model's product:session variance with its boundary LRT (periodFits, computed by the
 *     plumbing) → one flag per attribute, product null; watch p < 0.05, act p < 0.01 (methods §6.3);
 * (b) a step-change detector per recurring product × attribute: the session-wise product effect
 *     (difference from the reference product when one is served in most sessions, else from the
 *     session mean) is baselined and charted with the same EWMA as drift (exact limits widened for
 *     the estimated centre), limits sized for the number K of product × attribute charts.
 *     Why a chart and not a two-segment mean-shift test: the chart uses each new session as it
 *     arrives, gives a change-session estimate (CUSUM), and its false-alarm budget per year is
 *     set the same way as the assessor charts, so one setting controls both. The moving-range
 *     spread includes batch-to-batch variation, so ordinary batch noise does not signal.
 * Cochran's Q / I² over the recent window and Kendall's W of product ranks go into the evidence.
 */
import type { Flag, FlagSeverity } from '../../domain/flags.js';
import { monitorSeries, type ChartDesigns, type MonitoredSegment, type SegmentOptions, type SeriesPoint } from '../monitor/chart.js';
import { controlBatchSessions, referencePeriodFor, type PanelHistory, type SessionAttributeResult } from '../monitor/series.js';
import { cochranQ, productRankConcordance, sessionProductEffects, type SessionProductEffect } from '../monitor/stability.js';
import { buildContext, resultKey, type FlagContext } from './context.js';
import type { PanelThresholds } from './settings.js';
import { chartSizing, sizedChartDesigns, type ChartSizing } from '../monitor/chart-design.js';
import type { ChartSizingMemo } from '../monitor/sizing-memo.js';
import { currentSpread, pooledSpread, signalOfSegment, thresholdText, type ChartSignal } from './chart-signal.js';
import { points, pValueText } from './format.js';

/** Share of sessions that must serve the reference product for effects to be taken relative to it. */
const REFERENCE_PRESENCE_SHARE = 0.8;

export interface ProductEffectSeries {
  attribute: string;
  product: string;
  relativeTo: 'session-mean' | 'reference';
  referenceProduct: string | null;
  points: SeriesPoint[];
  effects: SessionProductEffect[];
}

/** Session-wise product-effect series of every product × attribute (for charts and the step detector). */
export function productEffectSeries(ctx: FlagContext): ProductEffectSeries[] {
  const out: ProductEffectSeries[] = [];
  const sessions = ctx.history.sessions;
  for (const attribute of ctx.history.attributes) {
    const results = sessions.map((s) => ctx.results.get(resultKey(s.label, attribute.name))).filter((r): r is SessionAttributeResult => r !== undefined);
    if (results.length === 0) continue;
    const reference =
      ctx.history.referenceProducts.find(
        (product) => results.filter((r) => r.fit.productMeans.some((m) => m.product === product)).length >= REFERENCE_PRESENCE_SHARE * results.length,
      ) ?? null;
    const bySession = new Map<string, SessionProductEffect[]>();
    for (const result of results) bySession.set(result.session, sessionProductEffects(result, reference));
    const products = [...new Set([...bySession.values()].flat().map((e) => e.product))].sort();
    for (const product of products) {
      const effects: SessionProductEffect[] = [];
      const series = sessions.map((s) => {
        const effect = bySession.get(s.label)?.find((e) => e.product === product);
        if (effect) effects.push(effect);
        return { session: s.label, date: s.date, value: effect ? effect.effect : null };
      });
      out.push({ attribute: attribute.name, product, relativeTo: reference ? 'reference' : 'session-mean', referenceProduct: reference, points: series, effects });
    }
  }
  return out;
}

export function productFlags(ctx: FlagContext): Flag[] {
  return [...periodFlags(ctx), ...stepFlags(ctx)];
}

function periodFlags(ctx: FlagContext): Flag[] {
  const s = ctx.settings.productStability;
  const out: Flag[] = [];
  for (const period of ctx.history.periodFits ?? []) {
    if (!period.lrt || period.sessions.length === 0) continue;
    const p = period.lrt.pValue;
    const attribute = ctx.history.attributes.find((a) => a.name === period.attribute);
    const scaleRange = attribute ? attribute.scaleMax - attribute.scaleMin : Number.NaN;
    const productSessionSd = Math.sqrt(Math.max(0, period.productSessionVariance));
    // A significant LRT alone is not enough: months of data detect trivially small batch variation.
    const sdFraction = productSessionSd / scaleRange;
    const severity: FlagSeverity | null =
      p < s.lrtActPValue && sdFraction >= s.lrtActMinSdFraction
        ? 'act'
        : p < s.lrtWatchPValue && sdFraction >= s.lrtWatchMinSdFraction
          ? 'watch'
          : null;
    if (!severity) continue;
    const results = period.sessions.map((label) => ctx.results.get(resultKey(label, period.attribute))).filter((r): r is SessionAttributeResult => r !== undefined);
    const concordance = productRankConcordance(results);
    const first = period.sessions[0];
    const last = period.sessions[period.sessions.length - 1];
    out.push({
      kind: 'unstable-product',
      assessor: null,
      product: null,
      attribute: period.attribute,
      firstSession: first,
      severity,
      evidence: {
        test: 'boundary likelihood-ratio test of the product:session variance in the period model (50:50 χ²₀/χ²₁ mixture, methods §3.7a)',
        statistic: period.lrt.likelihoodRatio,
        pValue: p,
        qValue: null,
        n: period.sessions.length,
        threshold:
          severity === 'act'
            ? `p < ${s.lrtActPValue} and product:session SD ≥ ${s.lrtActMinSdFraction} × scale range`
            : `p < ${s.lrtWatchPValue} and product:session SD ≥ ${s.lrtWatchMinSdFraction} × scale range`,
        productSessionSdScaleFraction: sdFraction,
        lastSession: last,
        productSessionVariance: period.productSessionVariance,
        kendallW: concordance?.W ?? null,
        kendallWPValue: concordance?.pValue ?? null,
        kendallWProducts: concordance?.products ?? [],
      },
      message: `From ${first} to ${last}, the differences between products on ${period.attribute} changed from session to session more than the ratings' noise explains (product-by-session SD ${points(Math.sqrt(Math.max(0, period.productSessionVariance)), 2)} points, likelihood-ratio test p ${p < 1e-16 ? '' : '= '}${pValueText(p)}).`,
    });
  }
  return out;
}

/**
 * The step detector's chart of every recurring product × attribute: the exact chart the flags read
 * (same designs, baseline, restarts and pooled spread floor), so the pages draw what the flag saw.
 */
export interface ProductStepChart {
  series: ProductEffectSeries;
  segments: MonitoredSegment[];
  designs: ChartDesigns;
  sizing: ChartSizing;
  /** What the flag rule reads off the current segment (null: nothing). */
  signal: ChartSignal | null;
}

export function productStepCharts(ctx: FlagContext): ProductStepChart[] {
  const s = ctx.settings.productStability;
  const c = ctx.settings.charts;
  const recurring = productEffectSeries(ctx).filter((series) => series.effects.length >= s.minSessions);
  if (recurring.length === 0) return [];
  const batchChanges = controlBatchSessions(ctx.history);
  // Product-effect baselines follow the whole panel's reference period, if one is set.
  const panelPeriod = referencePeriodFor(ctx.history, null)?.sessions ?? null;
  const sizing = chartSizing(recurring.length, c.sessionsPerYear, s.stepFalseAlarmsPerYear, s.stepWatchFalseAlarmsPerYear, c.ewmaLambda, c.cusumK);
  const optionsOf = (series: ProductEffectSeries): SegmentOptions => ({
    baseline: { fullValues: c.baselineSessions, minimumValues: Math.max(c.minBaselineSessions, s.minSessions) },
    restartSessions: series.relativeTo === 'reference' ? batchChanges : [],
    referenceSessions: panelPeriod,
  });
  // Effects of one attribute share the same noise (same SE formula): pool their spreads.
  const spreads = new Map<string, (number | null)[]>();
  for (const series of recurring) spreads.set(series.attribute, [...(spreads.get(series.attribute) ?? []), currentSpread(series.points, optionsOf(series))]);
  const designs = sizedChartDesigns(sizing, c.baselineSessions, [], ctx.sizingMemo);
  return recurring.map((series) => {
    const guard = ctx.settings.level.watchFraction * (ctx.scaleRange.get(series.attribute) ?? 1);
    const floor = pooledSpread(spreads.get(series.attribute) ?? []);
    const segments = monitorSeries(series.points, designs, { ...optionsOf(series), spreadFloorSd: floor });
    return { series, segments, designs, sizing, signal: signalOfSegment(segments[segments.length - 1], sizing, false, guard, floor) };
  });
}

function stepFlags(ctx: FlagContext): Flag[] {
  const window = new Set(ctx.recentWindow);
  const out: Flag[] = [];
  for (const { series, signal, sizing } of productStepCharts(ctx)) {
    if (!signal) continue;
    const recentEffects = series.effects.filter((e) => window.has(e.session));
    const heterogeneity = cochranQ(recentEffects);
    const against = series.relativeTo === 'reference' ? `relative to ${series.referenceProduct}` : 'relative to the session average';
    out.push({
      kind: 'unstable-product',
      assessor: null,
      product: series.product,
      attribute: series.attribute,
      firstSession: signal.changeSession,
      severity: signal.severity,
      evidence: {
        test: `${signal.chart} chart on the session-wise product effect (${against}), baseline from the first sessions`,
        statistic: signal.statistic,
        pValue: null,
        qValue: null,
        n: signal.nPoints,
        threshold: thresholdText(signal, sizing, 'product × attribute charts'),
        signalSession: signal.signalSession,
        lastSession: ctx.history.sessions[ctx.history.sessions.length - 1]?.label,
        direction: signal.direction,
        baseline: signal.baseline,
        recentShiftPoints: signal.recentShift,
        relativeTo: series.relativeTo,
        referenceProduct: series.referenceProduct,
        cochranQ: heterogeneity?.q ?? null,
        cochranPValue: heterogeneity?.pValue ?? null,
        iSquared: heterogeneity?.iSquared ?? null,
      },
      message: `Since ${signal.changeSession}, ${series.product}'s ${series.attribute} ${against} has been about ${points(Math.abs(signal.recentShift))} points ${signal.direction === 'up' ? 'higher' : 'lower'} than in the baseline sessions (the ${signal.chart} chart signalled at ${signal.signalSession}).`,
    });
  }
  return out;
}

/** Session-wise product-effect series of a panel history (for the product-stability charts). */
export function productEffectSeriesOf(history: PanelHistory, settings: PanelThresholds): ProductEffectSeries[] {
  return productEffectSeries(buildContext(history, settings));
}

/** The step detector's charts of a panel history (for the pages: the chart the flags read). */
export function productStepChartsOf(history: PanelHistory, settings: PanelThresholds, sizingMemo?: ChartSizingMemo): ProductStepChart[] {
  return productStepCharts(buildContext(history, settings, sizingMemo));
}
