/** The monitor overview of a panel: every assessor's summary chart, the open flags, the events. */
import { buildMonitorOverviewView, type MonitorOverviewView } from '../report/monitor-overview-view.js';
import { derivedFromHistory } from './panel-context.js';
import { assessorSampleSizes, chartDesigns, monitoredSummary } from './monitor-charts.js';
import type { MonitorContext } from './monitor-context.js';

export function buildOverviewPage(ctx: MonitorContext): MonitorOverviewView {
  const { designs, baseline } = chartDesigns(ctx.thresholds, ctx.assessors.length, ctx.sizingMemo);
  const sizes = assessorSampleSizes(ctx.history);
  return buildMonitorOverviewView({
    panel: ctx.panel.name,
    sessions: ctx.history.sessions,
    nAttributes: ctx.attributes.length,
    // The summary charts change only with the data and the chart settings.
    assessors: derivedFromHistory(ctx.memo, ctx.history, `overview ${JSON.stringify(ctx.thresholds.charts)}`, () =>
      ctx.assessors.map((assessor) => ({
        assessor,
        ...(sizes.get(assessor) ?? { nSessions: 0, nRatings: 0 }),
        summary: monitoredSummary(ctx.history, assessor, designs, baseline, ctx.levelCharts()),
      })),
    ),
    openFlags: ctx.read.flags({ status: 'open' }).map((r) => r.flag),
    events: ctx.history.events,
    designs,
    refit: ctx.read.refitStatus(),
  });
}
