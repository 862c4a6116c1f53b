/**
 * Product stability (methods §3.7): per attribute, the period model's product:session variance
 * and its boundary LRT for each stored window; for the chosen attribute, session-wise effects
 * of each recurring product with confidence intervals, Cochran's Q/I², and Kendall's W of the
 * product ranks over the latest window. All numbers come in computed; this only arranges them.
 */
import { buildControlChart, type ChartView } from './charts/control-chart.js';
import type { Flag } from '../domain/flags.js';
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
  products: (RecurringProductInput & { nSessions: number; chart: ChartView; cochran: (RecurringProductInput['cochran'] & { iSquaredPercent: number }) | null })[];
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
    products: input.recurring.map((p) => {
      const bySession = new Map(p.effects.map((e) => [e.session, e]));
      const pick = (f: (e: ProductEffectPointInput) => number) => input.sessions.map((s) => (bySession.has(s) ? f(bySession.get(s)!) : null));
      return {
        ...p,
        cochran: p.cochran ? { ...p.cochran, iSquaredPercent: 100 * p.cochran.iSquared } : null,
        nSessions: p.effects.length,
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
