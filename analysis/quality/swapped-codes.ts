/**
 * Suspected swapped sample codes (methods §5.10, common practice): an assessor's profiles of two
 * products each lie closer to the other product's panel profile than to their own.
 * Per assessor × replicate: x_pj = own rating, g_pj = leave-one-out panel mean (all replicates),
 * both centred over products and divided by s_j = √MS_AP,j; D_pq = Σ_j (x̃_pj − g̃_qj)²;
 * G_pq = (D_pp + D_qq) − (D_pq + D_qp), ρ_pq = G_pq/(D_pp + D_qq). Flag (watch, never act) when
 * D_pq < D_pp, D_qp < D_qq and ρ_pq ≥ minRelativeGain (0.30).
 * Requirements: ≥ minAttributes attributes with s_j > 0, ≥ 4 products, panel product p < 0.05 in
 * ≥ 3 attributes. Products with similar profiles cannot be told apart (documented limitation).
 */
import { cellMeans, interactionMeanSquare, type SessionData } from './session-data.js';

export interface SwapFinding {
  assessor: string;
  replicate: number;
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
  for (const assessor of data.assessors) {
    for (let replicate = 1; replicate <= data.nReplicates; replicate++) {
      // Products this assessor rated in this replicate on every usable attribute.
      const products = data.products.filter((p) => tables.every((t) => t.replicates?.get(assessor)?.get(p)?.has(replicate)));
      if (products.length < 4) continue;
      // x̃ and g̃ as flat arrays [product × attribute] (this loop runs for every assessor × replicate).
      const nP = products.length;
      const nJ = tables.length;
      const x = new Float64Array(nP * nJ);
      const g = new Float64Array(nP * nJ);
      let ok = true;
      for (let j = 0; j < nJ && ok; j++) {
        const table = tables[j];
        const ownMeans = table.means.get(assessor);
        const ownReplicates = table.replicates?.get(assessor);
        let ownSum = 0;
        let panelSum = 0;
        for (let i = 0; i < nP; i++) {
          const p = products[i];
          const others = (table.count.get(p) ?? 0) - 1;
          if (others <= 0) {
            ok = false;
            break;
          }
          const own = ownReplicates?.get(p)?.get(replicate) as number;
          const panel = ((table.sum.get(p) ?? 0) - (ownMeans?.get(p) ?? 0)) / others;
          x[i * nJ + j] = own;
          g[i * nJ + j] = panel;
          ownSum += own;
          panelSum += panel;
        }
        if (!ok) break;
        const sd = table.attribute.sd;
        for (let i = 0; i < nP; i++) {
          x[i * nJ + j] = (x[i * nJ + j] - ownSum / nP) / sd;
          g[i * nJ + j] = (g[i * nJ + j] - panelSum / nP) / sd;
        }
      }
      if (!ok) continue;
      const distance = (p: number, q: number): number => {
        let sum = 0;
        for (let j = 0; j < nJ; j++) {
          const d = x[p * nJ + j] - g[q * nJ + j];
          sum += d * d;
        }
        return sum;
      };
      for (let p = 0; p < nP - 1; p++) {
        for (let q = p + 1; q < nP; q++) {
          const dpp = distance(p, p);
          const dqq = distance(q, q);
          const dpq = distance(p, q);
          const dqp = distance(q, p);
          const gain = dpp + dqq - (dpq + dqp);
          const relativeGain = dpp + dqq > 0 ? gain / (dpp + dqq) : 0;
          if (dpq < dpp && dqp < dqq && relativeGain >= options.minRelativeGain) {
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
    }
  }
  return findings;
}

function codeOf(data: SessionData, assessor: string, product: string, replicate: number): string | null {
  return data.ratings.find((r) => r.assessor === assessor && r.product === product && r.replicate === replicate && r.code !== null)?.code ?? null;
}
