import type { AssessorIndicesJson } from '../../domain/analysis.js';
import type { Observation } from '../../domain/ratings.js';
import { fUpperTail } from '../distributions/index.js';
import { mean } from '../descriptive/mean.js';
import { pearsonCorrelation } from '../descriptive/pearson-correlation.js';

/**
 * The five analyze-contract indices of one session and attribute (issue 3, part 4), one entry
 * per assessor in first-seen order: the definitions of levelOffset, assessorAnova,
 * agreementEstimate and scalingEstimate over buildCellTable, computed on flat arrays of cell
 * codes instead of maps of maps (a year of sessions: 6,240 assessor rows, about a third of the
 * analyze command's work before). Sums run in the same order as there, so the values are the
 * same to the last bit; a property test holds the two to equality.
 *
 * Throws when the observations mix sessions or attributes or hold a non-finite value (a
 * programming error), with buildCellTable's messages.
 */
export function contractIndices(observations: readonly Observation[]): AssessorIndicesJson[] {
  const n = observations.length;
  if (n === 0) return [];
  const { session, attribute } = observations[0];

  // Assessors and products in first-seen order; each rating's cell = assessor × P + product.
  const assessorCode = new Map<string, number>();
  const productCode = new Map<string, number>();
  const assessors: string[] = [];
  const products: string[] = [];
  const assessorOf = new Int32Array(n);
  const productOf = new Int32Array(n);
  let lastAssessor: string | undefined;
  let lastAssessorCode = -1;
  for (let i = 0; i < n; i++) {
    const observation = observations[i];
    if (observation.session !== session || observation.attribute !== attribute) {
      throw new Error('buildCellTable: observations must come from one session and one attribute');
    }
    if (!Number.isFinite(observation.value)) throw new Error('buildCellTable: a rating value is not a finite number');
    // Consecutive ratings mostly share the assessor: compare before hashing.
    if (observation.assessor !== lastAssessor) {
      lastAssessor = observation.assessor;
      let code = assessorCode.get(lastAssessor);
      if (code === undefined) {
        assessorCode.set(lastAssessor, (code = assessors.length));
        assessors.push(lastAssessor);
      }
      lastAssessorCode = code;
    }
    assessorOf[i] = lastAssessorCode;
    let product = productCode.get(observation.product);
    if (product === undefined) {
      productCode.set(observation.product, (product = products.length));
      products.push(observation.product);
    }
    productOf[i] = product;
  }
  const nA = assessors.length;
  const nP = products.length;
  const nCells = nA * nP;

  // Ratings grouped by cell, in rating order within a cell (a counting sort). An assessor's
  // cells are also listed in the order the assessor first rated them: the within-cell sum of
  // squares runs in that order, as buildCellTable's row map does.
  const counts = new Int32Array(nCells);
  const firstRatedOrder: number[][] = Array.from({ length: nA }, () => []);
  for (let i = 0; i < n; i++) {
    const cell = assessorOf[i] * nP + productOf[i];
    if (counts[cell]++ === 0) firstRatedOrder[assessorOf[i]].push(cell);
  }
  const start = new Int32Array(nCells + 1);
  for (let c = 0; c < nCells; c++) start[c + 1] = start[c] + counts[c];
  const values = new Float64Array(n);
  const cursor = start.slice(0, nCells);
  for (let i = 0; i < n; i++) values[cursor[assessorOf[i] * nP + productOf[i]]++] = observations[i].value;

  const cellMeans = new Float64Array(nCells);
  for (let c = 0; c < nCells; c++) if (counts[c] > 0) cellMeans[c] = meanOfRange(values, start[c], start[c + 1]);
  const withinSumOfSquares = new Float64Array(nA);
  const withinDf = new Int32Array(nA);
  for (let a = 0; a < nA; a++) {
    let sumOfSquares = 0;
    for (const cell of firstRatedOrder[a]) {
      const m = cellMeans[cell];
      for (let k = start[cell]; k < start[cell + 1]; k++) sumOfSquares += (values[k] - m) ** 2;
      withinDf[a] += counts[cell] - 1;
    }
    withinSumOfSquares[a] = sumOfSquares;
  }
  // M_p: mean over the assessors who rated p of m_ap, in assessor order.
  const panelMeans = new Float64Array(nP);
  const column: number[] = [];
  for (let p = 0; p < nP; p++) {
    column.length = 0;
    for (let a = 0; a < nA; a++) if (counts[a * nP + p] > 0) column.push(cellMeans[a * nP + p]);
    panelMeans[p] = mean(column);
  }

  const rows: AssessorIndicesJson[] = new Array(nA);
  const own: number[] = [];
  const panel: number[] = [];
  const agreementOwn: number[] = [];
  const agreementRest: number[] = [];
  const rest: number[] = [];
  for (let a = 0; a < nA; a++) {
    // The assessor's products in table order, with m_ap and M_p.
    own.length = 0;
    panel.length = 0;
    agreementOwn.length = 0;
    agreementRest.length = 0;
    let nRatings = 0;
    for (let p = 0; p < nP; p++) {
      const cell = a * nP + p;
      if (counts[cell] === 0) continue;
      own.push(cellMeans[cell]);
      panel.push(panelMeans[p]);
      nRatings += counts[cell];
      rest.length = 0;
      for (let other = 0; other < nA; other++) if (other !== a && counts[other * nP + p] > 0) rest.push(cellMeans[other * nP + p]);
      if (rest.length > 0) {
        agreementOwn.push(cellMeans[cell]);
        agreementRest.push(mean(rest));
      }
    }
    const nProducts = own.length;
    const ownMean = mean(own);
    const panelMeanOfMeans = mean(panel);

    // One-way ANOVA on product (discrimination, repeatability).
    const df = withinDf[a];
    const ss = withinSumOfSquares[a];
    const withinMeanSquare = df > 0 ? ss / df : null;
    let discriminationF: number | null = null;
    let discriminationP: number | null = null;
    if (nProducts >= 2 && df > 0 && ss > 0) {
      // Mean of all the assessor's ratings, cells in table order (two passes, as mean()).
      let sum = 0;
      for (let p = 0; p < nP; p++) {
        const cell = a * nP + p;
        for (let k = start[cell]; k < start[cell + 1]; k++) sum += values[k];
      }
      const first = sum / nRatings;
      let correction = 0;
      for (let p = 0; p < nP; p++) {
        const cell = a * nP + p;
        for (let k = start[cell]; k < start[cell + 1]; k++) correction += values[k] - first;
      }
      const overallMean = first + correction / nRatings;
      let betweenSumOfSquares = 0;
      for (let p = 0; p < nP; p++) {
        const cell = a * nP + p;
        if (counts[cell] > 0) betweenSumOfSquares += counts[cell] * (cellMeans[cell] - overallMean) ** 2;
      }
      const dfNumerator = nProducts - 1;
      discriminationF = betweenSumOfSquares / dfNumerator / (withinMeanSquare as number);
      discriminationP = fUpperTail(discriminationF, dfNumerator, df);
    }

    let agreementR: number | null = null;
    if (agreementOwn.length >= 3) {
      const r = pearsonCorrelation(agreementOwn, agreementRest);
      if (!Number.isNaN(r)) agreementR = r;
    }

    let scaling: number | null = null;
    if (nProducts >= 2) {
      let sxx = 0;
      let sxy = 0;
      for (let i = 0; i < nProducts; i++) {
        const dx = panel[i] - panelMeanOfMeans;
        sxx += dx * dx;
        sxy += dx * (own[i] - ownMean);
      }
      if (sxx > 0) scaling = sxy / sxx;
    }

    rows[a] = {
      session,
      attribute,
      assessor: assessors[a],
      offset: nProducts === 0 ? null : ownMean - panelMeanOfMeans,
      discriminationF,
      discriminationP,
      repeatabilityMSE: withinMeanSquare,
      agreementR,
      scaling,
    };
  }
  return rows;
}

/** mean() of analysis/descriptive (two passes with the correction) over values[from, to). */
function meanOfRange(values: Float64Array, from: number, to: number): number {
  const n = to - from;
  let sum = 0;
  for (let k = from; k < to; k++) sum += values[k];
  const first = sum / n;
  let correction = 0;
  for (let k = from; k < to; k++) correction += values[k] - first;
  return first + correction / n;
}
