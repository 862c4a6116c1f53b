/**
 * Stability of product effects across sessions (methods notes §3.7 b–d).
 *
 * (b) Session-wise effect of product p: τ̂ = m_p − mean of the session's product means, with
 *     SE = √((P − 1)/P · MS_AP/(A n)) on (A − 1)(P − 1) df, where MS_AP/n = σ²_AP + σ²_E/n
 *     (balanced expected mean squares, methods §1.2 and §3.7b [DER]); when the product set rotates,
 *     the difference from the reference product, SE = √(2 MS_AP/(A n)). Without replicates
 *     (no assessor:product component) the residual variance plays σ²_AP + σ²_E.
 * (c) Cochran's Q and I² per product (Cochran 1954; Higgins & Thompson 2002).
 * (d) Kendall's W of product ranks across sessions (Kendall & Babington Smith 1939), from
 *     analysis/reliability.
 */
import { chiSquareUpperTail, tQuantile } from '../distributions/index.js';
import { kendallW, type KendallWResult } from '../reliability/index.js';
import type { SessionAttributeResult } from './series.js';

export interface SessionProductEffect {
  session: string;
  date: string;
  attribute: string;
  product: string;
  /** Difference from the session mean of products, or from the reference product. */
  effect: number;
  effectSe: number;
  df: number;
  ciLow: number;
  ciHigh: number;
  relativeTo: 'session-mean' | 'reference';
}

/** Product effects of one session/attribute; `referenceProduct` null → deviations from the session mean. */
export function sessionProductEffects(result: SessionAttributeResult, referenceProduct: string | null, confLevel = 0.95): SessionProductEffect[] {
  const fit = result.fit;
  const means = fit.productMeans;
  const nProducts = means.length;
  const nAssessors = fit.assessors;
  if (nProducts < 2 || nAssessors < 2) return [];
  const replicatesPerCell = Math.max(1, fit.n / (nAssessors * nProducts));
  const interactionVariance = fit.variance['assessor:product'];
  // MS_AP/n: σ²_AP + σ²_E/n with replicates; the residual (σ²_AP + σ²_E confounded) without.
  const msApPerReplicate = interactionVariance === null ? fit.variance.residual : interactionVariance + fit.variance.residual / replicatesPerCell;
  const df = (nAssessors - 1) * (nProducts - 1);
  const tCritical = tQuantile(1 - (1 - confLevel) / 2, df);
  const reference = referenceProduct === null ? undefined : means.find((m) => m.product === referenceProduct);
  if (referenceProduct !== null && !reference) return [];
  const sessionMean = means.reduce((s, m) => s + m.mean, 0) / nProducts;
  return means
    .filter((m) => m.product !== referenceProduct)
    .map((m) => {
      const effect = reference ? m.mean - reference.mean : m.mean - sessionMean;
      const effectSe = reference ? Math.sqrt((2 * msApPerReplicate) / nAssessors) : Math.sqrt((((nProducts - 1) / nProducts) * msApPerReplicate) / nAssessors);
      return {
        session: result.session,
        date: result.date,
        attribute: result.attribute,
        product: m.product,
        effect,
        effectSe,
        df,
        ciLow: effect - tCritical * effectSe,
        ciHigh: effect + tCritical * effectSe,
        relativeTo: reference ? ('reference' as const) : ('session-mean' as const),
      };
    });
}

export interface CochranQ {
  /** Inverse-variance weighted mean effect. */
  pooledEffect: number;
  q: number;
  df: number;
  pValue: number;
  /** max(0, (Q − df)/Q). */
  iSquared: number;
}

/** null when fewer than two effects or a non-positive SE. */
export function cochranQ(effects: readonly { effect: number; effectSe: number }[]): CochranQ | null {
  if (effects.length < 2 || effects.some((e) => !(e.effectSe > 0))) return null;
  let weightSum = 0;
  let weighted = 0;
  for (const e of effects) {
    const w = 1 / (e.effectSe * e.effectSe);
    weightSum += w;
    weighted += w * e.effect;
  }
  const pooledEffect = weighted / weightSum;
  let q = 0;
  for (const e of effects) q += ((e.effect - pooledEffect) / e.effectSe) ** 2;
  const df = effects.length - 1;
  return { pooledEffect, q, df, pValue: chiSquareUpperTail(q, df), iSquared: q > 0 ? Math.max(0, (q - df) / q) : 0 };
}

/**
 * Kendall's W of the products common to all given sessions, each session a "judge" ranking the
 * products by their mean (methods §3.7d). null when fewer than 3 common products or 2 sessions.
 */
export function productRankConcordance(results: readonly SessionAttributeResult[]): (KendallWResult & { products: string[]; sessions: string[] }) | null {
  if (results.length < 2) return null;
  const common = results
    .map((r) => new Set(r.fit.productMeans.map((m) => m.product)))
    .reduce((a, b) => new Set([...a].filter((p) => b.has(p))));
  const products = [...common].sort();
  if (products.length < 3) return null;
  const scores = results.map((r) => products.map((p) => r.fit.productMeans.find((m) => m.product === p)?.mean as number));
  return { ...kendallW(scores), products, sessions: results.map((r) => r.session) };
}
