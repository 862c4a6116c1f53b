/**
 * Suspected swapped sample codes (methods §5.10, common practice): an assessor's profiles of two
 * products each lie closer to the other product's panel profile than to their own.
 * Per assessor × replicate: x_pj = own rating, g_pj = leave-one-out panel mean (all replicates),
 * both centred over products and divided by s_j = √MS_AP,j; D_pq = Σ_j (x̃_pj − g̃_qj)²;
 * G_pq = (D_pp + D_qq) − (D_pq + D_qp), ρ_pq = G_pq/(D_pp + D_qq). Flag (watch, never act) when
 * D_pq < D_pp, D_qp < D_qq and ρ_pq ≥ minRelativeGain (0.30).
 * Checked first on the assessor's whole-session profiles (replicates averaged: a swap in every
 * replicate), then per replicate only where the replicates disagree as a swap would make them:
 * the replicate's profiles of p and q must also each lie closer to the assessor's own other
 * replicates' profile of the other product (our addition, CP: single-replicate checks alone
 * raised swaps on ordinary noise).
 * Requirements: ≥ minAttributes attributes with s_j > 0, ≥ 4 products, panel product p < 0.05 in
 * ≥ 3 attributes. Products with similar profiles cannot be told apart (documented limitation).
 */
import { cellMeans, interactionMeanSquare, type SessionData } from './session-data.js';

export interface SwapFinding {
  assessor: string;
  /** null: the whole session (all replicates averaged); else the one replicate. */
  replicate: number | null;
  productA: string;
  productB: string;
  relativeGain: number;
  /** Sample codes served for the two products in this replicate, when known. */
  codes: [string | null, string | null];
  nAttributes: number;
}

export function detectSwappedCodes(
  data: SessionData,
  productTestP: ReadonlyMap<string, number | null>,
  options: { minRelativeGain: number; minAttributes: number },
): SwapFinding[] {
  const usable = data.attributes
    .map((a) => ({ name: a.name, sd: Math.sqrt(interactionMeanSquare(data, a.name) ?? 0) }))
    .filter((a) => a.sd > 0);
  if (usable.length < options.minAttributes || data.products.length < 4) return [];
  const discriminating = usable.filter((a) => {
    const p = productTestP.get(a.name);
    return p !== null && p !== undefined && p < 0.05;
  });
  if (discriminating.length < 3) return [];
  // Per attribute: cell means, and per product the sum and count of all assessors' cell means, so
  // that a leave-one-out panel mean is (sum − own)/(count − 1) without rescanning the panel.
  const tables = usable.map((attribute) => {
    const means = cellMeans(data, attribute.name);
    const sum = new Map<string, number>();
    const count = new Map<string, number>();
    for (const row of means.values()) {
      for (const [product, mean] of row) {
        sum.set(product, (sum.get(product) ?? 0) + mean);
        count.set(product, (count.get(product) ?? 0) + 1);
      }
    }
    return { attribute, means, sum, count, replicates: data.byReplicate.get(attribute.name) };
  });
  const findings: SwapFinding[] = [];
  const nJ = tables.length;
  const typicalCache = new Map<number, number>();
  // The panel's typical correlation of an assessor's profile with the others' (median over assessors).
  const typicalCorrelation = (replicate: number): number => {
    const cached = typicalCache.get(replicate);
    if (cached !== undefined) return cached;
    const rs: number[] = [];
    for (const other of data.assessors) {
      const products = data.products.filter((p) => tables.every((t) => (replicate === 0 ? t.means.get(other)?.has(p) : t.replicates?.get(other)?.get(p)?.has(replicate))));
      if (products.length < 4) continue;
      const built = profilesOf(other, replicate, products);
      if (built) rs.push(profileCorrelation(built.x, built.g, products.length, nJ, -1, -1));
    }
    const sorted = rs.sort((a, b) => a - b);
    const typical = sorted.length === 0 ? -1 : sorted.length % 2 ? sorted[sorted.length >> 1] : (sorted[(sorted.length >> 1) - 1] + sorted[sorted.length >> 1]) / 2;
    typicalCache.set(replicate, typical);
    return typical;
  };
  function profilesOf(assessor: string, replicate: number, products: readonly string[]): { x: Float64Array; g: Float64Array } | null {
    const ownValue = (table: (typeof tables)[number], product: string): number | undefined =>
      replicate === 0 ? table.means.get(assessor)?.get(product) : table.replicates?.get(assessor)?.get(product)?.get(replicate);
    const nP = products.length;
    const x = new Float64Array(nP * nJ);
    const g = new Float64Array(nP * nJ);
    for (let j = 0; j < nJ; j++) {
      const table = tables[j];
      let ownSum = 0;
      let panelSum = 0;
      for (let i = 0; i < nP; i++) {
        const p = products[i];
        const others = (table.count.get(p) ?? 0) - 1;
        if (others <= 0) return null;
        const own = ownValue(table, p) as number;
        const panel = ((table.sum.get(p) ?? 0) - (table.means.get(assessor)?.get(p) ?? 0)) / others;
        x[i * nJ + j] = own;
        g[i * nJ + j] = panel;
        ownSum += own;
        panelSum += panel;
      }
      const sd = table.attribute.sd;
      for (let i = 0; i < nP; i++) {
        x[i * nJ + j] = (x[i * nJ + j] - ownSum / nP) / sd;
        g[i * nJ + j] = (g[i * nJ + j] - panelSum / nP) / sd;
      }
    }
    return { x, g };
  }
  for (const assessor of data.assessors) {
    const profiles = (replicate: number, products: readonly string[]) => profilesOf(assessor, replicate, products);
    const distance = (a: Float64Array, p: number, b: Float64Array, q: number): number => {
      let sum = 0;
      for (let j = 0; j < nJ; j++) {
        const d = a[p * nJ + j] - b[q * nJ + j];
        sum += d * d;
      }
      return sum;
    };
    /**
     * Pairs whose own profiles each lie closer to the other product's panel profile, and where the
     * exchange explains the assessor's disagreement: with p and q put back, the correlation of the
     * assessor's profile with the panel's reaches the panel's typical correlation (median − margin).
     * An assessor who ranks, flattens or scrambles products disagrees whatever is exchanged.
     */
    const swappedPairs = (x: Float64Array, g: Float64Array, nP: number, typicalR: number): { p: number; q: number; relativeGain: number }[] => {
      const out: { p: number; q: number; relativeGain: number }[] = [];
      for (let p = 0; p < nP - 1; p++) {
        for (let q = p + 1; q < nP; q++) {
          if (profileCorrelation(x, g, nP, nJ, p, q) < typicalR - SWAP_R_MARGIN) continue;
          const dpp = distance(x, p, g, p);
          const dqq = distance(x, q, g, q);
          const dpq = distance(x, p, g, q);
          const dqp = distance(x, q, g, p);
          const relativeGain = dpp + dqq > 0 ? (dpp + dqq - (dpq + dqp)) / (dpp + dqq) : 0;
          if (dpq < dpp && dqp < dqq && relativeGain >= options.minRelativeGain) out.push({ p, q, relativeGain });
        }
      }
      return out;
    };
    // 1. The whole session: both (all) replicates averaged, so a swap of every replicate is seen
    //    with the replicate noise halved.
    const sessionProducts = data.products.filter((p) => tables.every((t) => t.means.get(assessor)?.has(p)));
    const seen = new Set<string>();
    if (sessionProducts.length >= 4) {
      const whole = profiles(0, sessionProducts);
      if (whole) {
        for (const { p, q, relativeGain } of swappedPairs(whole.x, whole.g, sessionProducts.length, typicalCorrelation(0))) {
          seen.add(`${sessionProducts[p]}|${sessionProducts[q]}`);
          findings.push({
            assessor,
            replicate: null,
            productA: sessionProducts[p],
            productB: sessionProducts[q],
            relativeGain,
            codes: [codeOf(data, assessor, sessionProducts[p], 1), codeOf(data, assessor, sessionProducts[q], 1)],
            nAttributes: usable.length,
          });
        }
      }
    }
    if (data.nReplicates < 2) continue;
    // 2. One replicate, only where the assessor's replicates disagree in the way a swap explains:
    //    the replicate's profiles of p and q must each also lie closer to the assessor's OWN other
    //    replicates' profile of the other product. Noise alone rarely passes both checks.
    for (let replicate = 1; replicate <= data.nReplicates; replicate++) {
      const products = data.products.filter((p) =>
        tables.every((t) => t.replicates?.get(assessor)?.get(p)?.has(replicate) && [...(t.replicates?.get(assessor)?.get(p)?.keys() ?? [])].some((r) => r !== replicate)),
      );
      if (products.length < 4) continue;
      const own = profiles(replicate, products);
      if (!own) continue;
      // The assessor's other replicates, averaged, centred and scaled like x.
      const rest = new Float64Array(products.length * nJ);
      for (let j = 0; j < nJ; j++) {
        const table = tables[j];
        let sum = 0;
        products.forEach((p, i) => {
          const values = [...(table.replicates?.get(assessor)?.get(p) ?? new Map<number, number>())].filter(([r]) => r !== replicate).map(([, v]) => v);
          rest[i * nJ + j] = values.reduce((a, b) => a + b, 0) / values.length;
          sum += rest[i * nJ + j];
        });
        for (let i = 0; i < products.length; i++) rest[i * nJ + j] = (rest[i * nJ + j] - sum / products.length) / table.attribute.sd;
      }
      for (const { p, q, relativeGain } of swappedPairs(own.x, own.g, products.length, typicalCorrelation(replicate))) {
        if (seen.has(`${products[p]}|${products[q]}`)) continue;
        const confirmed = distance(own.x, p, rest, q) < distance(own.x, p, rest, p) && distance(own.x, q, rest, p) < distance(own.x, q, rest, q);
        if (!confirmed) continue;
        findings.push({
          assessor,
          replicate,
          productA: products[p],
          productB: products[q],
          relativeGain,
          codes: [codeOf(data, assessor, products[p], replicate), codeOf(data, assessor, products[q], replicate)],
          nAttributes: usable.length,
        });
      }
    }
  }
  return findings;
}

/** Minimum correlation, below the panel's median, of an assessor's profile once the pair is put back (CP). */
const SWAP_R_MARGIN = 0.15;

/**
 * Correlation over products × attributes of the assessor's centred, scaled profile x with the
 * panel's g, with rows p and q of x exchanged (p = q = −1: as rated).
 */
function profileCorrelation(x: Float64Array, g: Float64Array, nP: number, nJ: number, p: number, q: number): number {
  let sxy = 0;
  let sxx = 0;
  let syy = 0;
  for (let i = 0; i < nP; i++) {
    const row = i === p ? q : i === q ? p : i;
    for (let j = 0; j < nJ; j++) {
      const xv = x[row * nJ + j];
      const gv = g[i * nJ + j];
      sxy += xv * gv;
      sxx += xv * xv;
      syy += gv * gv;
    }
  }
  return sxx > 0 && syy > 0 ? sxy / Math.sqrt(sxx * syy) : 0;
}

function codeOf(data: SessionData, assessor: string, product: string, replicate: number): string | null {
  return data.ratings.find((r) => r.assessor === assessor && r.product === product && r.replicate === replicate && r.code !== null)?.code ?? null;
}
