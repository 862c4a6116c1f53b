/**
 * Start values of the one-session search (session-criterion.ts) from unweighted cell-means
 * moments: an ANOVA of the cell means with the harmonic mean of the cell counts as the replicate
 * number (the usual unweighted-means analysis of unbalanced two-way data; Searle, Casella &
 * McCulloch 1992, Variance Components, ch. 5). Close to the answer for nearly balanced sessions,
 * kept away from the boundary as the balanced start is, so every direction is explored.
 */

export interface CellSummaries {
  /** Ratings per assessor × product cell (row-major, assessor-major). */
  count: Float64Array;
  /** Cell means, centred on the grand mean. */
  mean: Float64Array;
  /** Sum of squares within cells. */
  withinSS: number;
  nObservations: number;
  nAssessors: number;
  nProducts: number;
  withInteraction: boolean;
}

/** θ to start from (relative SDs, assessor then assessor:product). */
export function momentStart(cells: CellSummaries): number[] {
  const { count, mean, withinSS, nObservations, nAssessors, nProducts, withInteraction } = cells;
  let present = 0;
  let inverseCounts = 0;
  const assessorMean = new Float64Array(nAssessors);
  const productMean = new Float64Array(nProducts);
  const productCells = new Float64Array(nProducts);
  let grandOfCells = 0;
  for (let a = 0; a < nAssessors; a++) {
    let cellsOfAssessor = 0;
    for (let j = 0; j < nProducts; j++) {
      const cell = a * nProducts + j;
      if (count[cell] === 0) continue;
      present++;
      cellsOfAssessor++;
      inverseCounts += 1 / count[cell];
      assessorMean[a] += mean[cell];
      productMean[j] += mean[cell];
      productCells[j]++;
      grandOfCells += mean[cell];
    }
    assessorMean[a] /= cellsOfAssessor;
  }
  for (let j = 0; j < nProducts; j++) productMean[j] /= productCells[j];
  grandOfCells /= present;
  const harmonicCount = present / inverseCounts;
  let interactionSS = 0;
  for (let a = 0; a < nAssessors; a++) {
    for (let j = 0; j < nProducts; j++) {
      const cell = a * nProducts + j;
      if (count[cell] === 0) continue;
      const r = mean[cell] - assessorMean[a] - productMean[j] + grandOfCells;
      interactionSS += r * r;
    }
  }
  const interactionMS = interactionSS / Math.max(1, present - nAssessors - nProducts + 1);
  let assessorSS = 0;
  for (let a = 0; a < nAssessors; a++) assessorSS += (assessorMean[a] - grandOfCells) ** 2;
  const assessorVarianceOfMeans = assessorSS / Math.max(1, nAssessors - 1);
  const productsPerAssessor = present / nAssessors;
  const clip = (ratio: number): number => Math.sqrt(Math.max(Number.isFinite(ratio) ? ratio : 0.25, 0.01));
  if (!withInteraction || !(nObservations > present)) {
    const residual = interactionMS * harmonicCount;
    if (!(residual > 0)) return withInteraction ? [0.5, 0.5] : [0.5];
    const start = [clip((assessorVarianceOfMeans - interactionMS / productsPerAssessor) / residual)];
    return withInteraction ? [...start, 0.5] : start;
  }
  const residual = withinSS / (nObservations - present);
  if (!(residual > 0)) return [0.5, 0.5];
  const interaction = interactionMS - residual / harmonicCount;
  const assessor = assessorVarianceOfMeans - interactionMS / productsPerAssessor;
  return [clip(assessor / residual), clip(interaction / residual)];
}
