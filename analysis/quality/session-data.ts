/**
 * One session's ratings arranged for the data-quality checks: cell means per attribute ×
 * assessor × product, replicate values, and the interaction mean square of each attribute.
 */
import type { Rating } from '../../domain/ratings.js';

export interface QualityAttribute {
  name: string;
  scaleMin: number;
  scaleMax: number;
}

export interface SessionData {
  session: string;
  attributes: QualityAttribute[];
  assessors: string[];
  products: string[];
  /** Largest replicate number seen (the planned replicates). */
  nReplicates: number;
  /** attribute → assessor → product → values (all replicates). */
  values: Map<string, Map<string, Map<string, number[]>>>;
  /** attribute → assessor → product → replicate → value. */
  byReplicate: Map<string, Map<string, Map<string, Map<number, number>>>>;
  ratings: Rating[];
  /** Memoised cell means per attribute (filled by cellMeans). */
  cellMeanCache: Map<string, Map<string, Map<string, number>>>;
}

export function sessionData(session: string, ratings: readonly Rating[], attributes: readonly QualityAttribute[]): SessionData {
  const own: Rating[] = [];
  const values: SessionData['values'] = new Map();
  const byReplicate: SessionData['byReplicate'] = new Map();
  const assessors = new Set<string>();
  const products = new Set<string>();
  let nReplicates = 1;
  // Plain get/set without helper closures: this runs for every rating of every session.
  for (const r of ratings) {
    if (r.session !== session) continue;
    own.push(r);
    assessors.add(r.assessor);
    products.add(r.product);
    if (r.replicate > nReplicates) nReplicates = r.replicate;
    let byAssessor = values.get(r.attribute);
    let repByAssessor = byReplicate.get(r.attribute);
    if (!byAssessor || !repByAssessor) {
      byAssessor = new Map();
      repByAssessor = new Map();
      values.set(r.attribute, byAssessor);
      byReplicate.set(r.attribute, repByAssessor);
    }
    let byProduct = byAssessor.get(r.assessor);
    let repByProduct = repByAssessor.get(r.assessor);
    if (!byProduct || !repByProduct) {
      byProduct = new Map();
      repByProduct = new Map();
      byAssessor.set(r.assessor, byProduct);
      repByAssessor.set(r.assessor, repByProduct);
    }
    const cell = byProduct.get(r.product);
    if (cell) cell.push(r.value);
    else byProduct.set(r.product, [r.value]);
    const repCell = repByProduct.get(r.product);
    if (repCell) repCell.set(r.replicate, r.value);
    else repByProduct.set(r.product, new Map([[r.replicate, r.value]]));
  }
  return {
    session,
    attributes: attributes.filter((a) => values.has(a.name)),
    assessors: [...assessors].sort(),
    products: [...products].sort(),
    nReplicates,
    values,
    byReplicate,
    ratings: own,
    cellMeanCache: new Map(),
  };
}

export function meanOf(values: readonly number[]): number {
  let s = 0;
  for (const v of values) s += v;
  return s / values.length;
}

export function medianOf(values: readonly number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const m = sorted.length >> 1;
  return sorted.length % 2 ? sorted[m] : (sorted[m - 1] + sorted[m]) / 2;
}

/** Cell means m_ap of one attribute: assessor → product → mean. */
export function cellMeans(data: SessionData, attribute: string): Map<string, Map<string, number>> {
  const cached = data.cellMeanCache.get(attribute);
  if (cached) return cached;
  const out = new Map<string, Map<string, number>>();
  data.cellMeanCache.set(attribute, out);
  for (const [assessor, byProduct] of data.values.get(attribute) ?? []) {
    const row = new Map<string, number>();
    for (const [product, vs] of byProduct) row.set(product, meanOf(vs));
    out.set(assessor, row);
  }
  return out;
}

/**
 * Interaction mean square MS_AP of one attribute from the complete assessor × product table of
 * cell means: n̄ Σ (m_ap − m_a· − m_·p + m_··)² / ((A − 1)(P − 1)) (exact for balanced data,
 * methods §1.2; n̄ = mean replicates per cell). Assessors missing a product are left out.
 * Without replicates this is the M1 residual mean square. null when fewer than 2 × 2.
 */
export function interactionMeanSquare(data: SessionData, attribute: string): number | null {
  const means = cellMeans(data, attribute);
  const products = data.products.filter((p) => [...means.values()].some((row) => row.has(p)));
  const complete = [...means.entries()].filter(([, row]) => products.every((p) => row.has(p)));
  const A = complete.length;
  const P = products.length;
  if (A < 2 || P < 2) return null;
  const rowMeans = complete.map(([, row]) => meanOf(products.map((p) => row.get(p) as number)));
  const colMeans = products.map((p) => meanOf(complete.map(([, row]) => row.get(p) as number)));
  const grand = meanOf(rowMeans);
  let ss = 0;
  let nCells = 0;
  let nValues = 0;
  complete.forEach(([assessor, row], a) => {
    products.forEach((p, j) => {
      const e = (row.get(p) as number) - rowMeans[a] - colMeans[j] + grand;
      ss += e * e;
      nCells++;
      nValues += data.values.get(attribute)?.get(assessor)?.get(p)?.length ?? 1;
    });
  });
  return ((nValues / nCells) * ss) / ((A - 1) * (P - 1));
}
