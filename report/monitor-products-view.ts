/**
 * Product stability (methods §3.7): per attribute, the period model's product:session variance
 * and its boundary LRT for each stored window; for the chosen attribute, session-wise effects
 * of each recurring product with confidence intervals, Cochran's Q/I², and Kendall's W of the
 * product ranks over the latest window. All numbers come in computed; this only arranges them.
 */
import type { ChartDesigns, MonitoredSegment, SeriesPoint } from '../analysis/monitor/chart.js';
import { buildControlChart, type ChartView } from './charts/control-chart.js';
import { monitorChartInputs } from './charts/monitor-charts.js';
import type { Flag } from '../domain/flags.js';
import { eventMarks, type MonitorEventInput } from './monitor-overview-view.js';
import { evidenceItems, monitorCrumbs, monitorHref, type EvidenceItem } from './monitor-common.js';
import type { PageViewBase } from './page-common.js';

export interface PeriodWindowInput {
  attribute: string;
  firstSession: string;
  lastSession: string;
  nSessions: number;
  /** σ̂²_PS (a variance, scale points²); null when the window could not be fitted. */
  productSessionVariance: number | null;
  likelihoodRatio: number | null;
  pValue: number | null;
  /** Why there is no fit, when there is none. */
  problem: string | null;
}

export interface ProductEffectPointInput {
  session: string;
  effect: number;
  ciLow: number;
  ciHigh: number;
  df: number;
}

export interface RecurringProductInput {
  product: string;
  relativeTo: 'session-mean' | 'reference';
  effects: ProductEffectPointInput[];
  cochran: { pooledEffect: number; q: number; df: number; pValue: number; iSquared: number } | null;
  /** The step detector's chart of this product (the chart the unstable-product flags read). */
  step: { series: SeriesPoint[]; segments: MonitoredSegment[]; designs: ChartDesigns } | null;
}

export interface ProductStabilityInput {
  panel: string;
  attributes: string[];
  attribute: string | null;
  sessions: string[];
  windows: PeriodWindowInput[];
  referenceProduct: string | null;
  recurring: RecurringProductInput[];
  minSessions: number;
  concordance: { W: number | null; chiSquare: number | null; df: number; pValue: number | null; products: string[]; sessions: string[] } | null;
  confLevel: number;
  /** Current unstable-product flags of the attribute (step changes, period LRT). */
  flags: Flag[];
  /** The open ones among them (signals on the step charts link to these). */
  openFlags: Flag[];
  events: readonly MonitorEventInput[];
  /** Sessions whose model of the chosen attribute could not be fitted, with the sentence saying why. */
  notFitted?: { session: string; reason: string }[];
}

export interface ProductStabilityView extends PageViewBase {
  panel: string;
  attribute: string | null;
  attributeLinks: { label: string; href: string; isCurrent: boolean }[];
  /** Latest window per attribute: the current state of product stability. */
  latest: PeriodWindowInput[];
  /** All stored windows of the chosen attribute, in time order. */
  history: PeriodWindowInput[];
  referenceProduct: string | null;
  effectsNote: string;
  /** The plain answer first: which products changed on this attribute, and the latest window's test. */
  summary: string;
  products: (Omit<RecurringProductInput, 'step'> & {
    nSessions: number;
    /** One plain sentence: changed (with the case's words) or stable. */
    sentence: string;
    chart: ChartView;
    /** The step detector's moving-average chart with its limits and signals (each on a case or with its reason). */
    stepChart: ChartView | null;
    cochran: (RecurringProductInput['cochran'] & { iSquaredPercent: number }) | null;
  })[];
  minSessions: number;
  concordance: ProductStabilityInput['concordance'];
  lrtNote: string;
  /** Sessions of the chosen attribute without a model fit ("Could not be fitted: …"). */
  notFitted: { session: string; reason: string }[];
  flags: { severity: string; product: string | null; firstSession: string; message: string; evidence: EvidenceItem[] }[];
}

export function buildProductStabilityView(input: ProductStabilityInput): ProductStabilityView {
  const latestByAttribute = new Map<string, PeriodWindowInput>();
  for (const w of input.windows) latestByAttribute.set(w.attribute, w); // windows come in time order
  const base = monitorHref(input.panel, 'products');
  const confPercent = Math.round(input.confLevel * 100);
  return {
    title: `Product stability: ${input.panel}`,
    breadcrumbs: monitorCrumbs(input.panel, 'Product stability'),
    panel: input.panel,
    attribute: input.attribute,
    attributeLinks: input.attributes.map((a) => ({ label: a, href: `${base}?attribute=${encodeURIComponent(a)}`, isCurrent: a === input.attribute })),
    latest: input.attributes.map((a) => latestByAttribute.get(a)).filter((w): w is PeriodWindowInput => w !== undefined),
    history: input.windows.filter((w) => w.attribute === input.attribute),
    referenceProduct: input.referenceProduct,
    effectsNote:
      input.referenceProduct === null
        ? `Effects are differences from the session's mean of products, with ${confPercent} % confidence intervals.`
        : `Effects are differences from the reference product ${input.referenceProduct} (comparable when the product set rotates), with ${confPercent} % confidence intervals.`,
    summary: productSummary(input),
    products: input.recurring.map(({ step, ...p }) => {
      const bySession = new Map(p.effects.map((e) => [e.session, e]));
      const pick = (f: (e: ProductEffectPointInput) => number) => input.sessions.map((s) => (bySession.has(s) ? f(bySession.get(s)!) : null));
      const stepCharts =
        step &&
        monitorChartInputs({
          title: `${p.product}, ${input.attribute}: step detector`,
          yLabel: 'effect (scale points)',
          sessions: input.sessions,
          series: step.series,
          segments: step.segments,
          designs: step.designs,
          events: eventMarks(input.events, null),
          role: 'product-step',
          owner: { assessor: null, attribute: input.attribute, product: p.product },
          flags: input.openFlags,
        });
      return {
        ...p,
        cochran: p.cochran ? { ...p.cochran, iSquaredPercent: 100 * p.cochran.iSquared } : null,
        nSessions: p.effects.length,
        sentence: productSentence(p, input),
        stepChart: stepCharts ? buildControlChart(stepCharts.ewma) : null,
        chart: buildControlChart({
          title: `${p.product}, ${input.attribute}`,
          yLabel: 'effect (scale points)',
          sessions: input.sessions,
          series: [{ name: 'effect', values: pick((e) => e.effect) }],
          lines: [
            ...(p.cochran ? [{ name: 'pooled', kind: 'centre' as const, values: p.cochran.pooledEffect }] : []),
            { name: `${confPercent} % CI`, kind: 'limit' as const, values: pick((e) => e.ciHigh) },
            { name: '', kind: 'limit' as const, values: pick((e) => e.ciLow) },
          ],
          isProvisional: false,
          events: [],
          description: `Session-wise effect of ${p.product} with ${confPercent} % confidence interval in ${p.effects.length} sessions.`,
        }),
      };
    }),
    minSessions: input.minSessions,
    concordance: input.concordance,
    notFitted: input.notFitted ?? [],
    flags: input.flags.map((f) => ({ severity: f.severity, product: f.product, firstSession: f.firstSession, message: f.message, evidence: evidenceItems(f) })),
    lrtNote:
      'The test of product:session is the boundary likelihood-ratio test of the period model (REML, with and without the term): p = ½·P(χ²₁ ≥ LR) (Self & Liang 1987). With few sessions it tends to be conservative.',
  };
}

function against(input: ProductStabilityInput): string {
  return input.referenceProduct === null ? 'relative to the session average' : `relative to ${input.referenceProduct}`;
}

function signedPoints(value: number): string {
  return `${value >= 0 ? '+' : '−'}${Math.abs(value).toFixed(2)} points`;
}

/** Changed (the open step case's own sentence) or stable, for one recurring product. */
function productSentence(p: Omit<RecurringProductInput, 'step'>, input: ProductStabilityInput): string {
  const open = input.openFlags.find((f) => f.product === p.product && f.attribute === input.attribute);
  if (open) return `Changed (${open.severity} case): ${open.message}`;
  const reviewed = input.flags.find((f) => f.product === p.product && f.attribute === input.attribute);
  if (reviewed) return `A step was found (${reviewed.severity}) and its case has been reviewed: ${reviewed.message}`;
  const mean = p.cochran ? `; its mean effect is ${signedPoints(p.cochran.pooledEffect)} ${against(input)}` : '';
  return `Stable: no step since its baseline in ${p.effects.length} sessions${mean}.`;
}

/** Which products changed on this attribute, then what the latest period window says. */
function productSummary(input: ProductStabilityInput): string {
  if (input.attribute === null) return 'No attribute chosen.';
  const n = input.recurring.length;
  const changed = input.recurring
    .map((p) => ({ product: p.product, flag: input.openFlags.find((f) => f.product === p.product && f.attribute === input.attribute) }))
    .filter((c): c is { product: string; flag: Flag } => c.flag !== undefined);
  const steps =
    n === 0
      ? `On ${input.attribute}, no product has been served in enough sessions (${input.minSessions}) to follow it yet.`
      : changed.length === 0
        ? `On ${input.attribute}, none of the ${n} recurring product${n === 1 ? '' : 's'} has changed level since its baseline.`
        : `On ${input.attribute}, ${changed.length} of the ${n} recurring products changed level since their baseline: ${changed.map((c) => `${c.product} (${c.flag.severity} case since ${c.flag.firstSession})`).join(', ')}.`;
  const latest = input.windows.filter((w) => w.attribute === input.attribute).at(-1);
  if (!latest || latest.pValue === null) return steps;
  const varied = latest.pValue < 0.05;
  return `${steps} In the latest window (${latest.firstSession} to ${latest.lastSession}) the differences between products ${varied ? 'varied from session to session more than' : 'varied from session to session no more than'} the ratings' noise explains (p ${latest.pValue < 0.001 ? '< 0.001' : `= ${latest.pValue.toFixed(latest.pValue < 0.01 ? 3 : 2)}`}).`;
}
