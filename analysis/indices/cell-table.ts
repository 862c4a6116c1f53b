import type { Observation } from '../../domain/ratings.js';
import { mean } from '../descriptive/mean.js';

/**
 * The ratings of one session and attribute arranged by assessor × product cell: the common
 * input of every per-assessor index. Assessors and products are kept in first-seen order;
 * `cellMean(a, p)` is m_ap, `panelMean(p)` is M_p = mean over assessors of m_ap (every assessor
 * who rated p counts once, whatever their number of replicates).
 */
export interface CellTable {
  session: string;
  attribute: string;
  assessors: string[];
  products: string[];
  /** values[assessor][product] = the assessor's ratings of the product (absent key = empty cell). */
  values: Map<string, Map<string, number[]>>;
  /** m_ap, computed once (same keys as `values`). */
  cellMeans: Map<string, Map<string, number>>;
  /** M_p, computed once. */
  panelMeans: Map<string, number>;
  /** Per assessor: Σ_p Σ_r (y_apr − m_ap)² and its df Σ_p (n_ap − 1). */
  withinSumOfSquares: Map<string, number>;
  withinDf: Map<string, number>;
  /**
   * Per product, the assessors who rated it (table order) and their cell means: built once with
   * the table, since the leave-one-out indices ask for every (assessor, product) pair (A² P lookups).
   */
  productColumns: Map<string, { assessors: string[]; means: number[] }>;
}

export function buildCellTable(observations: readonly Observation[]): CellTable {
  if (observations.length === 0) throw new Error('buildCellTable: no observations');
  const { session, attribute } = observations[0];
  const assessors: string[] = [];
  const productSet = new Set<string>();
  const products: string[] = [];
  const values = new Map<string, Map<string, number[]>>();
  for (const observation of observations) {
    if (observation.session !== session || observation.attribute !== attribute) {
      throw new Error('buildCellTable: observations must come from one session and one attribute');
    }
    if (!Number.isFinite(observation.value)) throw new Error('buildCellTable: a rating value is not a finite number');
    let row = values.get(observation.assessor);
    if (!row) {
      row = new Map();
      values.set(observation.assessor, row);
      assessors.push(observation.assessor);
    }
    if (!productSet.has(observation.product)) {
      productSet.add(observation.product);
      products.push(observation.product);
    }
    const cell = row.get(observation.product);
    if (cell) cell.push(observation.value);
    else row.set(observation.product, [observation.value]);
  }
  const cellMeans = new Map<string, Map<string, number>>();
  const withinSumOfSquares = new Map<string, number>();
  const withinDf = new Map<string, number>();
  for (const [assessor, row] of values) {
    const means = new Map<string, number>();
    let sumOfSquares = 0;
    let df = 0;
    for (const [product, cell] of row) {
      const m = mean(cell);
      means.set(product, m);
      for (const value of cell) sumOfSquares += (value - m) ** 2;
      df += cell.length - 1;
    }
    cellMeans.set(assessor, means);
    withinSumOfSquares.set(assessor, sumOfSquares);
    withinDf.set(assessor, df);
  }
  const panelMeans = new Map<string, number>();
  for (const product of products) {
    const means: number[] = [];
    for (const assessor of assessors) {
      const m = cellMeans.get(assessor)!.get(product);
      if (m !== undefined) means.push(m);
    }
    panelMeans.set(product, mean(means));
  }
  const productColumns = new Map(products.map((product) => [product, { assessors: [] as string[], means: [] as number[] }]));
  for (const assessor of assessors) {
    for (const [product, m] of cellMeans.get(assessor)!) {
      const column = productColumns.get(product)!;
      column.assessors.push(assessor);
      column.means.push(m);
    }
  }
  return { session, attribute, assessors, products, values, cellMeans, panelMeans, withinSumOfSquares, withinDf, productColumns };
}

/** Products the assessor rated, in table order. */
export function productsRatedBy(table: CellTable, assessor: string): string[] {
  const row = table.values.get(assessor);
  return row ? table.products.filter((product) => row.has(product)) : [];
}

/** m_ap, or null for an empty cell. */
export function cellMean(table: CellTable, assessor: string, product: string): number | null {
  return table.cellMeans.get(assessor)?.get(product) ?? null;
}

/** Cell means of product p for every assessor who rated it, optionally leaving one assessor out. */
export function cellMeansOfProduct(table: CellTable, product: string, leaveOut?: string): number[] {
  const column = table.productColumns.get(product);
  const means: number[] = [];
  if (!column) return means;
  for (let i = 0; i < column.assessors.length; i++) if (column.assessors[i] !== leaveOut) means.push(column.means[i]);
  return means;
}

/** M_p = mean over assessors of m_ap (null if nobody rated p). */
export function panelMean(table: CellTable, product: string): number | null {
  return table.panelMeans.get(product) ?? null;
}

/**
 * Balanced = every assessor rated every product with the same number n ≥ 1 of replicates.
 * Returns n, or null when the table is not balanced.
 */
export function balancedReplicates(table: CellTable): number | null {
  let n: number | null = null;
  for (const assessor of table.assessors) {
    const row = table.values.get(assessor) as Map<string, number[]>;
    for (const product of table.products) {
      const cell = row.get(product);
      if (!cell) return null;
      if (n === null) n = cell.length;
      else if (cell.length !== n) return null;
    }
  }
  return n;
}
