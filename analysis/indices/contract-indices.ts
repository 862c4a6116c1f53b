import type { AssessorIndicesJson } from '../../domain/analysis.js';
import { LevelCoder } from '../../domain/level-coder.js';
import type { Observation, RatingGroup } from '../../domain/ratings.js';
import { fUpperTail } from '../distributions/index.js';
import { mean } from '../descriptive/mean.js';
import { pearsonCorrelation } from '../descriptive/pearson-correlation.js';

/**
 * The five analyze-contract indices of one session and attribute, one entry per assessor in
 * first-seen order; the only implementation of these values (computeAssessorIndices takes them
 * from here and adds the tests). Level offset: over the products P_a the assessor rated, mean
 * m_ap − mean M_p, with M_p the mean over all assessors (this one included) of the cell means; in
 * a balanced design (A − 1)/A times the leave-one-out offset of methods §2.1. Discrimination: the
 * one-way ANOVA of the assessor's ratings on product; agreement r with the leave-one-out panel;
 * scaling cov/var over the assessor's products. Flat arrays of cell codes instead of maps of
 * maps: a year of sessions is 6,240 assessor rows, and the map version was about a third of the
 * analyze command's work. Checked against plain R in contract-indices.test.ts.
 *
 * Throws when the observations mix sessions or attributes or hold a non-finite value (a
 * programming error), with buildCellTable's messages.
 */
export function contractIndices(observations: readonly Observation[]): AssessorIndicesJson[] {
  if (observations.length === 0) return [];
  return indicesOfTable(cellStatistics(codeRatings(observations)));
}

/** contractIndices of a group already taken from one session and attribute (the analyze path). */
export function contractIndicesOfGroup(group: RatingGroup): AssessorIndicesJson[] {
  if (group.values.length === 0) return [];
  const { values } = group;
  for (let i = 0; i < values.length; i++) if (!Number.isFinite(values[i])) throw new Error('buildCellTable: a rating value is not a finite number');
  return indicesOfTable(cellStatistics(codeGroupIds(group)));
}

function indicesOfTable(table: CellStatistics): AssessorIndicesJson[] {
  const rows: AssessorIndicesJson[] = [];
  for (let a = 0; a < table.assessors.length; a++) rows.push(assessorRow(table, a));
  return rows;
}

/** Assessors and products in first-seen order; each rating's assessor and product code. */
interface CodedRatings {
  session: string;
  attribute: string;
  values: readonly number[];
  assessors: string[];
  nProducts: number;
  assessorOf: Int32Array;
  productOf: Int32Array;
}

/**
 * Cell statistics, cell = assessor × P + product: counts, the ratings grouped by cell (`values`
 * from `start[cell]` to `start[cell + 1]`), m_ap, each assessor's within-cell sum of squares and
 * df, and M_p.
 */
interface CellStatistics {
  session: string;
  attribute: string;
  assessors: string[];
  nProducts: number;
  counts: Int32Array;
  start: Int32Array;
  values: Float64Array;
  cellMeans: Float64Array;
  withinSumOfSquares: Float64Array;
  withinDf: Int32Array;
  panelMeans: Float64Array;
}

// The work is split into small functions so that each is optimised early (a year calls them
// 520 and 6 240 times; one large function waited for a slow optimising compile).

function codeRatings(observations: readonly Observation[]): CodedRatings {
  const n = observations.length;
  const { session, attribute } = observations[0];
  const assessorNames = new LevelCoder<string>();
  const productNames = new LevelCoder<string>();
  const values: number[] = new Array(n);
  const assessorIds = new Int32Array(n);
  const productIds = new Int32Array(n);
  for (let i = 0; i < n; i++) {
    const observation = observations[i];
    if (observation.session !== session || observation.attribute !== attribute) {
      throw new Error('buildCellTable: observations must come from one session and one attribute');
    }
    if (!Number.isFinite(observation.value)) throw new Error('buildCellTable: a rating value is not a finite number');
    values[i] = observation.value;
    assessorIds[i] = assessorNames.code(observation.assessor);
    productIds[i] = productNames.code(observation.product);
  }
  return codeGroupIds({ session, attribute, values, assessorIds, productIds, assessorNames: assessorNames.names, productNames: productNames.names });
}

/** Assessors and products coded in first-seen order, through lookup tables on the name ids. */
function codeGroupIds(group: RatingGroup): CodedRatings {
  const { assessorIds, productIds, values } = group;
  const n = values.length;
  const assessorCode = new Int32Array(group.assessorNames.length).fill(-1);
  const productCode = new Int32Array(group.productNames.length).fill(-1);
  const assessors: string[] = [];
  let nProducts = 0;
  const assessorOf = new Int32Array(n);
  const productOf = new Int32Array(n);
  for (let i = 0; i < n; i++) {
    let assessor = assessorCode[assessorIds[i]];
    if (assessor < 0) {
      assessor = assessorCode[assessorIds[i]] = assessors.length;
      assessors.push(group.assessorNames[assessorIds[i]]);
    }
    assessorOf[i] = assessor;
    let product = productCode[productIds[i]];
    if (product < 0) product = productCode[productIds[i]] = nProducts++;
    productOf[i] = product;
  }
  return { session: group.session, attribute: group.attribute, values, assessors, nProducts, assessorOf, productOf };
}

function cellStatistics(coded: CodedRatings): CellStatistics {
  const { values: ratingValues, assessorOf, productOf, nProducts: nP } = coded;
  const n = ratingValues.length;
  const nA = coded.assessors.length;
  const nCells = nA * nP;
  // Ratings grouped by cell, in rating order within a cell (a counting sort). An assessor's
  // cells are also listed in the order the assessor first rated them: the within-cell sum of
  // squares runs in that order, as buildCellTable's row map does.
  const counts = new Int32Array(nCells);
  const firstRatedOrder = new Int32Array(nCells);
  const nFirstRated = new Int32Array(nA);
  for (let i = 0; i < n; i++) {
    const a = assessorOf[i];
    const cell = a * nP + productOf[i];
    if (counts[cell]++ === 0) firstRatedOrder[a * nP + nFirstRated[a]++] = cell;
  }
  const start = new Int32Array(nCells + 1);
  for (let c = 0; c < nCells; c++) start[c + 1] = start[c] + counts[c];
  const values = new Float64Array(n);
  const cursor = start.slice(0, nCells);
  for (let i = 0; i < n; i++) values[cursor[assessorOf[i] * nP + productOf[i]]++] = ratingValues[i];

  const cellMeans = new Float64Array(nCells);
  for (let c = 0; c < nCells; c++) if (counts[c] > 0) cellMeans[c] = meanOfRange(values, start[c], start[c + 1]);
  const withinSumOfSquares = new Float64Array(nA);
  const withinDf = new Int32Array(nA);
  for (let a = 0; a < nA; a++) {
    let sumOfSquares = 0;
    for (let j = 0; j < nFirstRated[a]; j++) {
      const cell = firstRatedOrder[a * nP + j];
      const m = cellMeans[cell];
      for (let k = start[cell]; k < start[cell + 1]; k++) sumOfSquares += (values[k] - m) ** 2;
      withinDf[a] += counts[cell] - 1;
    }
    withinSumOfSquares[a] = sumOfSquares;
  }
  // M_p: mean over the assessors who rated p of m_ap, in assessor order.
  const panelMeans = new Float64Array(nP);
  for (let p = 0; p < nP; p++) {
    const column: number[] = [];
    for (let a = 0; a < nA; a++) if (counts[a * nP + p] > 0) column.push(cellMeans[a * nP + p]);
    panelMeans[p] = mean(column);
  }
  return { session: coded.session, attribute: coded.attribute, assessors: coded.assessors, nProducts: nP, counts, start, values, cellMeans, withinSumOfSquares, withinDf, panelMeans };
}

function assessorRow(table: CellStatistics, a: number): AssessorIndicesJson {
  const { counts, cellMeans, panelMeans, nProducts: nP } = table;
  const nA = table.assessors.length;
  // The assessor's products in table order, with m_ap and M_p; for agreement, m_ap and the mean
  // of the other assessors' cell means where someone else rated p.
  const own: number[] = [];
  const panel: number[] = [];
  const agreementOwn: number[] = [];
  const agreementRest: number[] = [];
  for (let p = 0; p < nP; p++) {
    const cell = a * nP + p;
    if (counts[cell] === 0) continue;
    own.push(cellMeans[cell]);
    panel.push(panelMeans[p]);
    const rest = meanOfOthers(table, a, p);
    if (!Number.isNaN(rest)) {
      agreementOwn.push(cellMeans[cell]);
      agreementRest.push(rest);
    }
  }
  const nProducts = own.length;
  const ownMean = mean(own);
  const panelMeanOfMeans = mean(panel);
  const df = table.withinDf[a];
  const withinMeanSquare = df > 0 ? table.withinSumOfSquares[a] / df : null;
  const discrimination = discriminationTest(table, a, nProducts, withinMeanSquare);
  let agreementR: number | null = null;
  if (agreementOwn.length >= 3) {
    const r = pearsonCorrelation(agreementOwn, agreementRest);
    if (!Number.isNaN(r)) agreementR = r;
  }
  return {
    session: table.session,
    attribute: table.attribute,
    assessor: table.assessors[a],
    offset: nProducts === 0 ? null : ownMean - panelMeanOfMeans,
    discriminationF: discrimination.F,
    discriminationP: discrimination.p,
    repeatabilityMSE: withinMeanSquare,
    agreementR,
    scaling: scalingSlope(own, panel, ownMean, panelMeanOfMeans),
  };
}

/** One-way ANOVA of the assessor's ratings on product (assessorAnova's F and p). */
function discriminationTest(table: CellStatistics, a: number, nProducts: number, withinMeanSquare: number | null): { F: number | null; p: number | null } {
  const { counts, start, values, cellMeans, nProducts: nP } = table;
  const df = table.withinDf[a];
  if (nProducts < 2 || df === 0 || !(table.withinSumOfSquares[a] > 0)) return { F: null, p: null };
  // Mean of all the assessor's ratings, cells in table order (two passes, as mean()).
  const from = start[a * nP];
  const to = start[a * nP + nP];
  const overallMean = meanOfRange(values, from, to);
  let betweenSumOfSquares = 0;
  for (let p = 0; p < nP; p++) {
    const cell = a * nP + p;
    if (counts[cell] > 0) betweenSumOfSquares += counts[cell] * (cellMeans[cell] - overallMean) ** 2;
  }
  const dfNumerator = nProducts - 1;
  const F = betweenSumOfSquares / dfNumerator / (withinMeanSquare as number);
  return { F, p: fUpperTail(F, dfNumerator, df) };
}

/** scalingEstimate's β̂ = Σ (M_p − M̄)(m_ap − m̄_a) / Σ (M_p − M̄)², null below 2 products or without spread. */
function scalingSlope(own: number[], panel: number[], ownMean: number, panelMeanOfMeans: number): number | null {
  if (own.length < 2) return null;
  let sxx = 0;
  let sxy = 0;
  for (let i = 0; i < own.length; i++) {
    const dx = panel[i] - panelMeanOfMeans;
    sxx += dx * dx;
    sxy += dx * (own[i] - ownMean);
  }
  return sxx > 0 ? sxy / sxx : null;
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

/**
 * mean() over the other assessors' cell means of product p (assessor order), NaN when no one else
 * rated it; the same two passes, without an array per product (6,240 assessor rows a year).
 */
function meanOfOthers(table: CellStatistics, a: number, p: number): number {
  const { counts, cellMeans, nProducts: nP } = table;
  const nA = table.assessors.length;
  let n = 0;
  let sum = 0;
  for (let other = 0; other < nA; other++) {
    if (other !== a && counts[other * nP + p] > 0) {
      sum += cellMeans[other * nP + p];
      n++;
    }
  }
  if (n === 0) return Number.NaN;
  const first = sum / n;
  let correction = 0;
  for (let other = 0; other < nA; other++) if (other !== a && counts[other * nP + p] > 0) correction += cellMeans[other * nP + p] - first;
  return first + correction / n;
}
