/**
 * Product stability of one attribute: the period fits' product × session variance, each recurring
 * product's effect across sessions with Cochran's Q, and the rank concordance of the latest window.
 */
import { productStepChartsOf } from '../analysis/flags/product-flags.js';
import { cochranQ, productRankConcordance } from '../analysis/monitor/stability.js';
import {
  buildProductStabilityView,
  type PeriodWindowInput,
  type ProductStabilityView,
  type RecurringProductInput,
} from '../report/monitor-products-view.js';
import { chosenAttribute } from './assessor-page.js';
import type { MonitorContext } from './monitor-context.js';

/** sessionProductEffects' default confidence level (analysis/monitor/stability.ts). */
const CONF_LEVEL = 0.95;

export function buildProductsPage(ctx: MonitorContext, params: { attribute?: unknown }): ProductStabilityView {
  const attribute = chosenAttribute(ctx, params.attribute);
  const windows: PeriodWindowInput[] = ctx.read
    .periodFits()
    .sort((a, b) => ctx.history.sessions.findIndex((s) => s.label === a.lastSession) - ctx.history.sessions.findIndex((s) => s.label === b.lastSession))
    .map((p) => {
      const result = p.result;
      const fitted = 'problem' in result ? null : result;
      return {
        attribute: p.attribute,
        firstSession: p.firstSession,
        lastSession: p.lastSession,
        nSessions: p.sessions.length,
        productSessionVariance: fitted ? (fitted.json.variance['product:session'] ?? null) : null,
        likelihoodRatio: fitted?.lrt?.likelihoodRatio ?? null,
        pValue: fitted?.lrt?.pValue ?? null,
        problem: 'problem' in result ? result.problem : null,
      };
    });
  const results = ctx.history.results.filter((r) => r.attribute === attribute);
  // The flag engine's own step charts (same effect series, reference product, limits and signals).
  const stepCharts = productStepChartsOf(ctx.history, ctx.thresholds, ctx.sizingMemo).filter((c) => c.series.attribute === attribute);
  const referenceProduct = stepCharts[0]?.series.referenceProduct ?? null;
  const minSessions = ctx.thresholds.productStability.minSessions;
  const recurring: RecurringProductInput[] = stepCharts.map(({ series: p, segments, designs }) => ({
    product: p.product,
    relativeTo: p.relativeTo,
    effects: p.effects.map((e) => ({ session: e.session, effect: e.effect, ciLow: e.ciLow, ciHigh: e.ciHigh, df: e.df })),
    cochran: cochranQ(p.effects),
    step: { series: p.points, segments, designs },
  }));
  const productFlags = ctx.read
    .flags({ kind: 'unstable-product' })
    .filter((r) => r.flag.attribute === attribute || r.flag.attribute === null);
  const latestWindow = windows.filter((w) => w.attribute === attribute).at(-1);
  const windowResults = latestWindow
    ? results.slice(results.findIndex((r) => r.session === latestWindow.firstSession), results.findIndex((r) => r.session === latestWindow.lastSession) + 1)
    : results;
  const concordance = productRankConcordance(windowResults);
  // The session fits of this attribute that could not be made (stored as the session's findings by the refit).
  const notFitted = ctx.read.sessionQuality().flatMap((q) =>
    q.findings.filter((f) => f.attribute === attribute && typeof f.message === 'string').map((f) => ({ session: q.session, reason: f.message })),
  );
  return buildProductStabilityView({
    notFitted,
    panel: ctx.panel.name,
    attributes: ctx.attributes,
    attribute,
    sessions: ctx.history.sessions.map((s) => s.label),
    windows,
    referenceProduct,
    recurring,
    minSessions,
    concordance: concordance && {
      W: concordance.W,
      chiSquare: concordance.chiSquare,
      df: concordance.df,
      pValue: concordance.pValue,
      products: concordance.products,
      sessions: concordance.sessions,
    },
    confLevel: CONF_LEVEL,
    flags: productFlags.map((r) => r.flag),
    openFlags: productFlags.filter((r) => r.status === 'open').map((r) => r.flag),
    events: ctx.history.events,
  });
}
