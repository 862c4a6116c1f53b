/**
 * One chart design, checked: the level charts the pages draw (assessorLevelCharts, act-level
 * limits) agree with the drift flags, the product step charts with the unstable-product cases, and every signal drawn on any page's chart belongs to a
 * case or carries a stated reason. Used by the agreement test (demo and one panel per scenario
 * family) and by the simulation report (every simulated panel).
 */
import { assessorLevelCharts, buildFlags, DEFAULT_THRESHOLDS, productStepChartsOf, type ProductStepChart } from '../../analysis/flags/index.js';
import { monitorSeries, type MonitoredSegment, type SeriesPoint } from '../../analysis/monitor/chart.js';
import { buildReferenceSeries, referencePeriodFor, type PanelHistory } from '../../analysis/monitor/series.js';
import { createChartSizingMemo } from '../../analysis/monitor/sizing-memo.js';
import { caseChart } from '../../monitor/case-chart.js';
import type { ChartView } from '../../report/charts/control-chart.js';
import { SIGNAL_REASON_WORDS } from '../../report/charts/monitor-charts.js';
import { buildAssessorMonitorView } from '../../report/monitor-assessor-view.js';
import { buildControlProductView } from '../../report/monitor-control-view.js';
import { buildMonitorOverviewView } from '../../report/monitor-overview-view.js';
import { buildProductStabilityView } from '../../report/monitor-products-view.js';
import { chartDesigns, controlRestartSessions, monitoredMeasures, monitoredSummary } from '../../monitor/monitor-charts.js';
import type { Flag } from '../../domain/flags.js';
import { historyUpTo, runPanel } from './pipeline.js';
import type { SimulationScenario } from './scenarios.js';

export interface Unexplained {
  assessor: string;
  chart: string;
  session: string;
}

/**
 * Signal points with neither a flag nor a stated reason. The first signal of a chart's current
 * segment must be the flag's signal session (the flag engine reports the first act-limit crossing,
 * so a chart drawn with other limits would disagree here); a per-attribute chart of an assessor
 * with an assessor-wide drift or jump flag is summarised by that flag (stated reason); older
 * segments closed by a restart are not judged by the flags (stated reason).
 */
export function unexplainedSignals(flags: readonly Flag[], charts: ReturnType<typeof assessorLevelCharts>, stepCharts: readonly ProductStepChart[] = []): { unexplained: Unexplained[]; nSignals: number } {
  const unexplained: Unexplained[] = [];
  let nSignals = 0;
  const drift = flags.filter((f) => f.kind === 'drift');
  const check = (assessor: string, attribute: string | null, segments: readonly MonitoredSegment[]) => {
    const current = segments[segments.length - 1];
    const first = current?.points.find((p) => p.ewmaSignal !== null);
    nSignals += segments.reduce((n, seg) => n + seg.points.filter((p) => p.ewmaSignal !== null).length, 0);
    if (!first) return;
    const wide = drift.find((f) => f.assessor === assessor && f.attribute === null);
    if (attribute !== null && wide) return;
    const flag = attribute === null ? wide : drift.find((f) => f.assessor === assessor && f.attribute === attribute);
    const flaggedAt = flag?.evidence.pattern === 'jump' ? flag.evidence.ewmaSignalSession : flag?.evidence.signalSession;
    if (flaggedAt !== first.session) unexplained.push({ assessor, chart: attribute ?? 'summary', session: `${first.session} (flag: ${String(flaggedAt ?? 'none')})` });
  };
  for (const [assessor, set] of charts) {
    check(assessor, null, set.summary.segments);
    for (const [attribute, chart] of set.attributes) check(assessor, attribute, chart.segments);
  }
  // Product step charts: the first drawn EWMA signal of the current segment is the step case's signal session.
  for (const step of stepCharts) {
    const { product, attribute } = step.series;
    nSignals += step.segments.reduce((n, seg) => n + seg.points.filter((p) => p.ewmaSignal !== null).length, 0);
    const first = step.segments[step.segments.length - 1]?.points.find((p) => p.ewmaSignal !== null);
    if (!first) continue;
    const flag = flags.find((f) => f.kind === 'unstable-product' && f.product === product && f.attribute === attribute);
    if (flag?.evidence.signalSession !== first.session) unexplained.push({ assessor: `product ${product}`, chart: attribute, session: `${first.session} (flag: ${String(flag?.evidence.signalSession ?? 'none')})` });
  }
  return { unexplained, nSignals };
}

/** Where a drawn signal neither belongs to a case nor carries a stated reason. */
export interface Unlinked {
  page: string;
  chart: string;
  point: string;
  reason: string | null;
}

/** Every signal point of every chart on a view (walks the view like the JSON twin does). */
function unlinkedSignals(page: string, charts: readonly ChartView[]): { unlinked: Unlinked[]; nSignals: number; nLinked: number } {
  const unlinked: Unlinked[] = [];
  let nSignals = 0;
  let nLinked = 0;
  for (const chart of charts) {
    for (const series of chart.series) {
      for (const p of series.points) {
        if (!p.isSignal) continue;
        nSignals++;
        if (p.signalReason === 'case') nLinked++;
        const stated = p.signalReason !== null && p.signalReason !== 'no-open-case' && (p.signalReason === 'case' || p.signalReason in SIGNAL_REASON_WORDS) && !!p.signalReasonText;
        if (!stated) unlinked.push({ page, chart: chart.title, point: `${p.session} ${series.name}`, reason: p.signalReason });
      }
    }
  }
  return { unlinked, nSignals, nLinked };
}

/**
 * Every page type built from the history and freshly built flags the way the routes build them
 * (monitor/*-page.ts through monitor-charts.ts and the report/ view builders): the overview,
 * every assessor × attribute page, the control-product page of every attribute and the case page
 * of every case. Each drawn signal must belong to a case or carry a stated reason.
 */
export function pageAgreement(history: PanelHistory, flags: readonly Flag[]) {
  const thresholds = DEFAULT_THRESHOLDS;
  const memo = createChartSizingMemo();
  const levelCharts = assessorLevelCharts(history, thresholds, memo);
  const assessors = [...levelCharts.keys()].sort();
  const attributes = history.attributes.map((a) => a.name);
  const summaryDesign = chartDesigns(thresholds, assessors.length, memo);
  const attributeDesign = chartDesigns(thresholds, assessors.length * attributes.length, memo);
  const results: ReturnType<typeof unlinkedSignals>[] = [];
  const overview = buildMonitorOverviewView({
    panel: 'P',
    sessions: history.sessions,
    nAttributes: attributes.length,
    assessors: assessors.map((assessor) => ({ assessor, nSessions: 0, nRatings: 0, summary: monitoredSummary(history, assessor, summaryDesign.designs, summaryDesign.baseline, levelCharts) })),
    openFlags: flags,
    events: history.events,
    designs: summaryDesign.designs,
    refit: { status: null, nDone: 0, nTasks: 0, message: null, flagsBuiltAt: null, flagsBuiltAtText: null, isStale: false },
  });
  results.push(unlinkedSignals('overview', overview.assessors.map((a) => a.summaryChart)));
  for (const assessor of assessors) {
    for (const attribute of attributes) {
      const view = buildAssessorMonitorView({
        panel: 'P',
        assessor,
        sessions: history.sessions,
        attributes,
        attribute,
        nSessions: 0,
        summary: monitoredSummary(history, assessor, summaryDesign.designs, summaryDesign.baseline, levelCharts),
        measures: monitoredMeasures(history, assessor, attribute, attributeDesign.designs, attributeDesign.baseline, levelCharts),
        flags: flags.filter((f) => f.assessor === assessor),
        events: history.events,
        designs: attributeDesign.designs,
      });
      results.push(unlinkedSignals(`assessor ${assessor}, ${attribute}`, [...(attribute === attributes[0] ? view.summary.charts : []), ...view.measures.flatMap((m) => m.charts)]));
    }
  }
  const product = history.referenceProducts[0] ?? null;
  for (const attribute of attributes) {
    const series = buildReferenceSeries(history).find((s) => s.product === product && s.attribute === attribute);
    if (!series) continue;
    const monitored = (points: SeriesPoint[], assessor: string | null) => ({
      series: points,
      segments: monitorSeries(points, summaryDesign.designs, { baseline: summaryDesign.baseline, restartSessions: controlRestartSessions(history, assessor), referenceSessions: referencePeriodFor(history, assessor)?.sessions ?? null }),
    });
    const view = buildControlProductView({
      panel: 'P',
      product,
      attributes,
      attribute,
      sessions: history.sessions.map((s) => s.label),
      panelMean: monitored(series.panelMean, null),
      assessors: series.assessorDeviation.map((d) => ({ assessor: d.assessor, ...monitored(d.points, d.assessor) })),
      events: history.events,
      designs: summaryDesign.designs,
    });
    results.push(unlinkedSignals(`control ${attribute}`, [...(view.panelMean?.charts ?? []), ...view.assessors.map((a) => a.chart)]));
  }
  // Product stability page of every attribute: each recurring product's step chart.
  const stepCharts = productStepChartsOf(history, thresholds, memo);
  let nProductLinked = 0;
  for (const attribute of attributes) {
    const view = buildProductStabilityView({
      panel: 'P',
      attributes,
      attribute,
      sessions: history.sessions.map((s) => s.label),
      windows: [],
      referenceProduct: null,
      recurring: stepCharts
        .filter((c) => c.series.attribute === attribute)
        .map((c) => ({ product: c.series.product, relativeTo: c.series.relativeTo, effects: [], cochran: null, step: { series: c.series.points, segments: c.segments, designs: c.designs } })),
      minSessions: thresholds.productStability.minSessions,
      concordance: null,
      confLevel: 0.95,
      flags: flags.filter((f) => f.kind === 'unstable-product'),
      openFlags: flags.filter((f) => f.kind === 'unstable-product'),
      events: history.events,
    });
    const productResult = unlinkedSignals(`products ${attribute}`, view.products.flatMap((p) => (p.stepChart ? [p.stepChart] : [])));
    nProductLinked += productResult.nLinked;
    results.push(productResult);
  }
  for (const flag of flags) {
    const chart = caseChart(flag, history, { thresholds, sizingMemo: memo });
    if (chart) results.push(unlinkedSignals(`case ${flag.kind} ${flag.assessor} ${flag.attribute}`, [chart]));
  }
  return {
    unlinked: results.flatMap((r) => r.unlinked),
    nSignals: results.reduce((n, r) => n + r.nSignals, 0),
    nLinked: results.reduce((n, r) => n + r.nLinked, 0),
    /** Signals on the product step charts that belong to an unstable-product case. */
    nProductLinked,
  };
}

export async function agreementOn(scenario: SimulationScenario) {
  const run = await runPanel(scenario);
  const history = historyUpTo(run);
  return chartFlagAgreement(history, buildFlags(history, DEFAULT_THRESHOLDS));
}

/** Both checks on a history and the flags built from it. */
export function chartFlagAgreement(history: PanelHistory, flags: readonly Flag[]) {
  return { ...unexplainedSignals(flags, assessorLevelCharts(history, DEFAULT_THRESHOLDS), productStepChartsOf(history, DEFAULT_THRESHOLDS)), pages: pageAgreement(history, flags) };
}
