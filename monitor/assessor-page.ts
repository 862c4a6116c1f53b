/** One assessor's monitor page: the summary chart and the five index charts of one attribute. */
import { buildAssessorMonitorView, type AssessorMonitorView } from '../report/monitor-assessor-view.js';
import { monitorHref } from '../report/monitor-common.js';
import { assessorSampleSizes, chartDesigns, monitoredMeasures, monitoredSummary } from './monitor-charts.js';
import { NotInPanel, type MonitorContext } from './monitor-context.js';

/** The attribute asked for when the panel has it, else the panel's first attribute. */
export function chosenAttribute(ctx: MonitorContext, requested: unknown): string | null {
  return typeof requested === 'string' && requested && ctx.attributes.includes(requested) ? requested : (ctx.attributes[0] ?? null);
}

export function buildAssessorPage(ctx: MonitorContext, params: { assessor: string; attribute?: unknown }): AssessorMonitorView {
  if (!ctx.assessors.includes(params.assessor)) {
    throw new NotInPanel(`${monitorHref(ctx.panel.name)}/assessors/${params.assessor}`.slice(0, 200));
  }
  const attribute = chosenAttribute(ctx, params.attribute);
  const summaryDesign = chartDesigns(ctx.thresholds, ctx.assessors.length, ctx.sizingMemo);
  const attributeDesign = chartDesigns(ctx.thresholds, ctx.assessors.length * Math.max(1, ctx.attributes.length), ctx.sizingMemo);
  return buildAssessorMonitorView({
    panel: ctx.panel.name,
    assessor: params.assessor,
    sessions: ctx.history.sessions,
    attributes: ctx.attributes,
    attribute,
    nSessions: assessorSampleSizes(ctx.history).get(params.assessor)?.nSessions ?? 0,
    summary: monitoredSummary(ctx.history, params.assessor, summaryDesign.designs, summaryDesign.baseline, ctx.levelCharts()),
    measures: attribute === null ? [] : monitoredMeasures(ctx.history, params.assessor, attribute, attributeDesign.designs, attributeDesign.baseline, ctx.levelCharts()),
    flags: ctx.read.flags({ status: 'open', assessor: params.assessor }).map((r) => r.flag),
    events: ctx.history.events,
    // Per-attribute charts: limits sized for the assessor × attribute chart set; the summary charts use their own.
    designs: attributeDesign.designs,
  });
}
