/**
 * Two-way assessor × product ANOVA of one session and attribute, for the balanced fast path:
 * with n replicates in every cell and all expected-mean-squares (ANOVA) estimates positive,
 * the ANOVA solution is the REML solution (Searle, Casella & McCulloch 1992, balanced data
 * chapter) and the Satterthwaite product test reduces to F = MS_P/MS_AP on
 * (P − 1, (A − 1)(P − 1)) (methods notes §1.2).
 */
export interface BalancedAnova {
  nAssessors: number;
  nProducts: number;
  /** Replicates per cell. */
  nReplicates: number;
  dfAssessor: number;
  dfProduct: number;
  dfInteraction: number;
  dfError: number;
  msAssessor: number;
  msProduct: number;
  msInteraction: number;
  /** NaN without replicates. */
  msError: number;
  /** Mean of the cell means (= the mean of all values, the design being balanced). */
  grandMean: number;
  /** ȳ_a·· by assessor index. */
  assessorMeans: Float64Array;
  /** ȳ_·p· by product index. */
  productMeans: Float64Array;
}

/** Returns null unless every assessor × product cell holds the same number of values. */
export function balancedAnova(values: ArrayLike<number>, assessorIndex: ArrayLike<number>, productIndex: ArrayLike<number>, nAssessors: number, nProducts: number): BalancedAnova | null {
  const n = values.length;
  const cells = nAssessors * nProducts;
  const counts = new Int32Array(cells);
  const sums = new Float64Array(cells);
  for (let i = 0; i < n; i++) {
    const cell = assessorIndex[i] * nProducts + productIndex[i];
    counts[cell]++;
    sums[cell] += values[i];
  }
  const replicates = counts[0];
  if (replicates === 0) return null;
  for (let c = 1; c < cells; c++) if (counts[c] !== replicates) return null;
  return balancedSums({ values, assessorIndex, productIndex, nAssessors, nProducts }, sums, replicates);
}

/** The ratings and their level codes, as balancedAnova takes them. */
interface Design {
  values: ArrayLike<number>;
  assessorIndex: ArrayLike<number>;
  productIndex: ArrayLike<number>;
  nAssessors: number;
  nProducts: number;
}

/**
 * The sums of squares of a balanced design. Apart from the cell counts above: the unbalanced
 * sessions that return early never run it, and its first run would otherwise throw away the
 * compiled counting loop (no type feedback yet for this part).
 */
function balancedSums(design: Design, sums: Float64Array, replicates: number): BalancedAnova {
  const { values, assessorIndex, productIndex, nAssessors, nProducts } = design;
  const n = values.length;
  const cells = nAssessors * nProducts;
  const cellMeans = Float64Array.from(sums, (sum) => sum / replicates);
  let grand = 0;
  for (const mean of cellMeans) grand += mean;
  grand /= cells;
  const assessorMeans = new Float64Array(nAssessors);
  const productMeans = new Float64Array(nProducts);
  for (let a = 0; a < nAssessors; a++) {
    for (let p = 0; p < nProducts; p++) {
      assessorMeans[a] += cellMeans[a * nProducts + p] / nProducts;
      productMeans[p] += cellMeans[a * nProducts + p] / nAssessors;
    }
  }
  let ssA = 0;
  for (const mean of assessorMeans) ssA += (mean - grand) ** 2;
  ssA *= replicates * nProducts;
  let ssP = 0;
  for (const mean of productMeans) ssP += (mean - grand) ** 2;
  ssP *= replicates * nAssessors;
  let ssAP = 0;
  for (let a = 0; a < nAssessors; a++) {
    for (let p = 0; p < nProducts; p++) ssAP += (cellMeans[a * nProducts + p] - assessorMeans[a] - productMeans[p] + grand) ** 2;
  }
  ssAP *= replicates;
  let ssE = 0;
  for (let i = 0; i < n; i++) ssE += (values[i] - cellMeans[assessorIndex[i] * nProducts + productIndex[i]]) ** 2;
  const dfAssessor = nAssessors - 1;
  const dfProduct = nProducts - 1;
  const dfInteraction = dfAssessor * dfProduct;
  const dfError = cells * (replicates - 1);
  return {
    nAssessors,
    nProducts,
    nReplicates: replicates,
    dfAssessor,
    dfProduct,
    dfInteraction,
    dfError,
    msAssessor: ssA / dfAssessor,
    msProduct: ssP / dfProduct,
    msInteraction: ssAP / dfInteraction,
    msError: dfError > 0 ? ssE / dfError : Number.NaN,
    grandMean: grand,
    assessorMeans,
    productMeans,
  };
}
