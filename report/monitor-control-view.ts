/**
 * The reference (blind control) product over time (methods §3.6): the panel's mean of the
 * control per session, and each assessor's deviation from the rest of the panel, as control
 * charts with events marked (a new control batch restarts the baselines).
 */
import type { ChartDesigns } from '../analysis/monitor/chart.js';
import { buildControlChart, type ChartView } from './charts/control-chart.js';
import { monitorChartInputs } from './charts/monitor-charts.js';
import { monitorCrumbs, monitorHref } from './monitor-common.js';
import { eventMarks, type MonitoredSeriesInput, type MonitorEventInput } from './monitor-overview-view.js';
import type { PageViewBase } from './page-common.js';

export interface ControlProductView extends PageViewBase {
  panel: string;
  product: string | null;
  attribute: string | null;
  attributeLinks: { label: string; href: string; isCurrent: boolean }[];
  panelMean: { charts: ChartView[]; nSessions: number; baselineStatus: string } | null;
  assessors: { assessor: string; nSessions: number; latestDeviation: number | null; chart: ChartView; baselineStatus: string }[];
  explanation: string;
}

export function buildControlProductView(input: {
  panel: string;
  product: string | null;
  attributes: string[];
  attribute: string | null;
  sessions: string[];
  panelMean: MonitoredSeriesInput | null;
  assessors: (MonitoredSeriesInput & { assessor: string })[];
  events: readonly MonitorEventInput[];
  designs: ChartDesigns;
}): ControlProductView {
  const base = monitorHref(input.panel, 'control');
  const chartsOf = (title: string, yLabel: string, s: MonitoredSeriesInput, assessor: string | null, size?: 'small') =>
    monitorChartInputs({
      title,
      yLabel,
      sessions: input.sessions,
      series: s.series,
      segments: s.segments,
      designs: input.designs,
      events: eventMarks(input.events, assessor),
      size,
      role: 'control',
      owner: { assessor, attribute: input.attribute },
      flags: [],
      // Each assessor's deviation is measured from the mean of the other assessors' control cell means.
      ...(assessor === null ? {} : { reference: { name: 'mean of the other assessors', value: 0 } }),
    });
  const panelCharts = input.panelMean ? chartsOf(`Panel mean of ${input.product}, ${input.attribute}`, 'mean (scale points)', input.panelMean, null) : null;
  return {
    title: `Control product: ${input.panel}`,
    breadcrumbs: monitorCrumbs(input.panel, 'Control product'),
    panel: input.panel,
    product: input.product,
    attribute: input.attribute,
    attributeLinks: input.attributes.map((a) => ({ label: a, href: `${base}?attribute=${encodeURIComponent(a)}`, isCurrent: a === input.attribute })),
    panelMean:
      panelCharts && input.panelMean
        ? {
            charts: [panelCharts.individuals, panelCharts.ewma].map(buildControlChart),
            nSessions: input.panelMean.series.filter((p) => p.value !== null).length,
            baselineStatus: panelCharts.baselineStatus,
          }
        : null,
    assessors: input.assessors.map((a) => {
      const charts = chartsOf(`${a.assessor}: deviation from the rest`, 'deviation (scale points)', a, a.assessor, 'small');
      const present = a.series.filter((p) => p.value !== null);
      return {
        assessor: a.assessor,
        nSessions: present.length,
        latestDeviation: present.length ? present[present.length - 1].value : null,
        chart: buildControlChart(charts.individuals),
        baselineStatus: charts.baselineStatus,
      };
    }),
    explanation:
      'The panel mean shows whole-panel drift or a change of control batch; each assessor’s deviation from the mean of the other assessors shows individual drift free of panel-wide movement. Mark a new control batch on the events page: the baselines restart there.',
  };
}
