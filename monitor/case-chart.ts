/**
 * The chart that shows a case: the assessor's per-session index on the case's attribute (or
 * averaged over attributes for a panel-wide drift), with the sessions behind the flag marked and
 * the assessor's retraining events drawn. Values are shown on their natural scale (points,
 * ratios, correlations), not the log scale the tests use, so the chart reads like the table.
 * A drift case shows the level the drift rule charts: the offset from the median of the other
 * assessors (docs/methods.md §3.9), with that reference drawn as a line at 0.
 */
import { productStepChartsOf, type PanelThresholds } from '../analysis/flags/index.js';
import type { AssessorSessionIndices } from '../analysis/indices/types.js';
import type { ChartSizingMemo } from '../analysis/monitor/sizing-memo.js';
import { buildAssessorSeries, indexLookup, type PanelHistory } from '../analysis/monitor/series.js';
import type { Flag } from '../domain/flags.js';
import { buildControlChart, type ChartView } from '../report/charts/control-chart.js';
import { monitorChartInputs } from '../report/charts/monitor-charts.js';
import { eventMarks } from '../report/monitor-overview-view.js';
import { kindLabel } from '../report/words.js';

interface Measure {
  yLabel: string;
  title: string;
  value: (row: AssessorSessionIndices) => number | null;
  /** The rest of the panel on this scale. */
  reference: number;
  referenceName: string;
  /** Values from the level against the median of the other assessors instead of `value`. */
  robustLevel?: boolean;
}

const LEVEL: Measure = { yLabel: 'level difference (points)', title: 'Level difference from the rest of the panel', value: (r) => r.offset, reference: 0, referenceName: 'panel' };
const MEASURES: Partial<Record<Flag['kind'], Measure>> = {
  lenient: LEVEL,
  harsh: LEVEL,
  drift: { ...LEVEL, title: 'Level difference from the median of the other assessors', referenceName: 'median of the other assessors', robustLevel: true },
  inconsistent: { yLabel: 'spread ratio (×)', title: "Replicate spread relative to the rest of the panel", value: (r) => r.repeatabilitySdRatio, reference: 1, referenceName: 'panel' },
  'non-discriminating': { yLabel: 'F (products)', title: 'Product separation (F ratio of the products)', value: (r) => r.discriminationF, reference: 1, referenceName: 'none' },
  disagreement: { yLabel: 'correlation r', title: 'Correlation of the product order with the rest of the panel', value: (r) => r.agreementR, reference: 0, referenceName: 'r = 0' },
  reversed: { yLabel: 'correlation r', title: 'Correlation of the product order with the rest of the panel', value: (r) => r.agreementR, reference: 0, referenceName: 'r = 0' },
  'scale-compression': { yLabel: 'spacing ratio (×)', title: "Spacing of the products relative to the panel's", value: (r) => r.scaling, reference: 1, referenceName: 'panel' },
  'scale-expansion': { yLabel: 'spacing ratio (×)', title: "Spacing of the products relative to the panel's", value: (r) => r.scaling, reference: 1, referenceName: 'panel' },
};

/** The sessions the flag's evidence rests on: its pooled sessions, or from where it starts to the newest it covers. */
export function flaggedSessions(flag: Flag, sessions: readonly string[]): Set<string> {
  const listed = flag.evidence.sessions;
  if (Array.isArray(listed) && listed.every((s) => typeof s === 'string')) return new Set(listed as string[]);
  const from = sessions.indexOf(flag.firstSession);
  const last = typeof flag.evidence.lastSession === 'string' ? sessions.indexOf(flag.evidence.lastSession) : sessions.length - 1;
  return new Set(from < 0 ? [] : sessions.slice(from, Math.max(from, last) + 1));
}

/**
 * null when the kind has no per-session series (the period model's product test, data findings).
 * A product's step case shows the step detector's own chart (with `settings`, which size it).
 */
export function caseChart(flag: Flag, history: PanelHistory, settings?: { thresholds: PanelThresholds; sizingMemo?: ChartSizingMemo }): ChartView | null {
  if (flag.kind === 'unstable-product') return settings && flag.product !== null ? productStepCaseChart(flag, history, settings.thresholds, settings.sizingMemo) : null;
  const measure = MEASURES[flag.kind];
  if (!measure || flag.assessor === null) return null;
  const sessions = history.sessions.map((s) => s.label);
  const byAttribute = indexLookup(history).get(flag.assessor);
  if (!byAttribute) return null;
  const attributes = flag.attribute === null ? [...byAttribute.keys()] : [flag.attribute];
  const robust = measure.robustLevel
    ? buildAssessorSeries({ ...history, attributes: history.attributes.filter((a) => attributes.includes(a.name)) }, ['level']).filter((s) => s.assessor === flag.assessor)
    : [];
  const robustAt = robust.map((s) => new Map(s.points.map((p) => [p.session, p.value])));
  const values = sessions.map((session) => {
    const found = (measure.robustLevel ? robustAt.map((m) => m.get(session) ?? null) : attributes.map((a) => byAttribute.get(a)?.get(session)).map((row) => (row ? measure.value(row) : null))).filter(
      (v): v is number => v !== null && Number.isFinite(v),
    );
    return found.length === 0 ? null : found.reduce((s, v) => s + v, 0) / found.length;
  });
  const marked = flaggedSessions(flag, sessions);
  const where = flag.attribute === null ? 'averaged over attributes' : flag.attribute;
  return buildControlChart({
    title: `${flag.assessor}, ${where}: ${measure.title.toLowerCase()}`,
    yLabel: measure.yLabel,
    sessions,
    series: [
      {
        name: flag.assessor,
        values,
        signals: sessions.map((s) => (marked.has(s) ? flag.severity : null)),
        signalReasons: sessions.map((s) => (marked.has(s) ? { code: 'case', text: `behind this case (“${kindLabel(flag.kind)}”)` } : null)),
        notes: sessions.map((s, i) => (values[i] === null ? null : `${s}: ${values[i]!.toFixed(2)}${marked.has(s) ? ' (behind this flag)' : ''}`)),
      },
    ],
    lines: measure.referenceName === 'none' ? [] : [{ name: measure.referenceName, kind: measure.robustLevel ? 'reference' : 'centre', values: measure.reference }],
    isProvisional: false,
    events: history.events.filter((e) => e.kind === 'retraining' && (e.assessor === null || e.assessor === flag.assessor)).map((e) => ({ session: e.session, label: 'retraining' })),
    description: `${marked.size} session${marked.size === 1 ? '' : 's'} behind the ${kindLabel(flag.kind)} case are marked in ${flag.severity === 'act' ? 'red' : 'orange'}.`,
  });
}

/** The moving-average chart the step rule read, its signals linked to this case. */
function productStepCaseChart(flag: Flag, history: PanelHistory, thresholds: PanelThresholds, sizingMemo?: ChartSizingMemo): ChartView | null {
  const step = productStepChartsOf(history, thresholds, sizingMemo).find((c) => c.series.product === flag.product && c.series.attribute === flag.attribute);
  if (!step) return null;
  const inputs = monitorChartInputs({
    title: `${flag.product}, ${flag.attribute}: step detector`,
    yLabel: 'effect (scale points)',
    sessions: history.sessions.map((s) => s.label),
    series: step.series.points,
    segments: step.segments,
    designs: step.designs,
    events: eventMarks(history.events, null),
    role: 'product-step',
    owner: { assessor: null, attribute: flag.attribute, product: flag.product! },
    flags: [flag],
  });
  return buildControlChart(inputs.ewma);
}
