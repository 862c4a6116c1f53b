/** The control (reference) product of one attribute: the panel mean and each assessor's deviation, monitored. */
import { monitorSeries, type SeriesPoint } from '../analysis/monitor/chart.js';
import { buildReferenceSeries, referencePeriodFor } from '../analysis/monitor/series.js';
import { buildControlProductView, type ControlProductView } from '../report/monitor-control-view.js';
import { chosenAttribute } from './assessor-page.js';
import { chartDesigns, controlRestartSessions } from './monitor-charts.js';
import type { MonitorContext } from './monitor-context.js';

/** The context must be loaded with ratings (`loadMonitorContext(…, { withRatings: true })`). */
export function buildControlPage(ctx: MonitorContext, params: { attribute?: unknown }): ControlProductView {
  const attribute = chosenAttribute(ctx, params.attribute);
  const product = ctx.history.referenceProducts[0] ?? null;
  const series = buildReferenceSeries(ctx.history).find((s) => s.product === product && s.attribute === attribute);
  const { designs, baseline } = chartDesigns(ctx.thresholds, ctx.assessors.length, ctx.sizingMemo);
  const monitored = (points: SeriesPoint[], assessor: string | null) => {
    const options = {
      baseline,
      restartSessions: controlRestartSessions(ctx.history, assessor),
      referenceSessions: referencePeriodFor(ctx.history, assessor)?.sessions ?? null,
    };
    return { series: points, segments: monitorSeries(points, designs, options) };
  };
  return buildControlProductView({
    panel: ctx.panel.name,
    product,
    attributes: ctx.attributes,
    attribute,
    sessions: ctx.history.sessions.map((s) => s.label),
    panelMean: series ? monitored(series.panelMean, null) : null,
    assessors: series ? series.assessorDeviation.map((d) => ({ assessor: d.assessor, ...monitored(d.points, d.assessor) })) : [],
    events: ctx.history.events,
    designs,
  });
}
