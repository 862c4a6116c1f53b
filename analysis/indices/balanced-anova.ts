import { mean } from '../descriptive/mean.js';
import { balancedReplicates, type CellTable } from './cell-table.js';

/**
 * Classical two-way ANOVA (assessor, product, assessor × product, replicate error) of a balanced
 * session table: A assessors × P products × n replicates. With n = 1 there is no error stratum and
 * the interaction is the error (model M1): `errorSumOfSquares`/`errorDf` are then 0.
 * Sums of squares from centred cell, row and column means.
 *
 * @see Montgomery, Design and Analysis of Experiments (two-factor factorial); methods notes §1.2.
 */
export interface BalancedAnova {
  nAssessors: number;
  nProducts: number;
  nReplicates: number;
  grandMean: number;
  /** Assessor means ȳ_a·· in table order of assessors. */
  assessorMeans: number[];
  /** Product means ȳ_·p· in table order of products. */
  productMeans: number[];
  /** cellMeans[a][p] = ȳ_ap·. */
  cellMeans: number[][];
  assessorSumOfSquares: number;
  productSumOfSquares: number;
  interactionSumOfSquares: number;
  errorSumOfSquares: number;
  assessorDf: number;
  productDf: number;
  interactionDf: number;
  errorDf: number;
}

/** null when the table is not balanced or has fewer than 2 assessors or 2 products. */
export function balancedAnova(table: CellTable): BalancedAnova | null {
  const n = balancedReplicates(table);
  const A = table.assessors.length;
  const P = table.products.length;
  if (n === null || A < 2 || P < 2) return null;
  const cells = table.assessors.map((assessor) => table.products.map((product) => table.values.get(assessor)!.get(product)!));
  const cellMeans = cells.map((row) => row.map((cell) => mean(cell)));
  const assessorMeans = cellMeans.map((row) => mean(row));
  const productMeans = table.products.map((_, p) => mean(cellMeans.map((row) => row[p])));
  const grandMean = mean(assessorMeans);
  let assessorSumOfSquares = 0;
  for (const m of assessorMeans) assessorSumOfSquares += (m - grandMean) ** 2;
  assessorSumOfSquares *= n * P;
  let productSumOfSquares = 0;
  for (const m of productMeans) productSumOfSquares += (m - grandMean) ** 2;
  productSumOfSquares *= n * A;
  let interactionSumOfSquares = 0;
  let errorSumOfSquares = 0;
  for (let a = 0; a < A; a++) {
    for (let p = 0; p < P; p++) {
      interactionSumOfSquares += (cellMeans[a][p] - assessorMeans[a] - productMeans[p] + grandMean) ** 2;
      for (const value of cells[a][p]) errorSumOfSquares += (value - cellMeans[a][p]) ** 2;
    }
  }
  interactionSumOfSquares *= n;
  return {
    nAssessors: A,
    nProducts: P,
    nReplicates: n,
    grandMean,
    assessorMeans,
    productMeans,
    cellMeans,
    assessorSumOfSquares,
    productSumOfSquares,
    interactionSumOfSquares,
    errorSumOfSquares,
    assessorDf: A - 1,
    productDf: P - 1,
    interactionDf: (A - 1) * (P - 1),
    errorDf: A * P * (n - 1),
  };
}
