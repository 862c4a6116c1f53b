import { fQuantile, fUpperTail } from '../distributions/index.js';
import { twoWayMeanSquares, type TwoWayMeanSquares } from './two-way-mean-squares.js';

/**
 * The six intraclass correlations of Shrout & Fleiss (1979) on a complete targets × judges
 * matrix (products × assessors cell means for a panel), with F tests and confidence intervals.
 *
 * ICC(1,1) = (BMS − WMS)/(BMS + (k − 1)WMS)          one-way random
 * ICC(2,1) = (BMS − EMS)/(BMS + (k − 1)EMS + k(JMS − EMS)/n)   two-way random, absolute agreement
 * ICC(3,1) = (BMS − EMS)/(BMS + (k − 1)EMS)          two-way mixed, consistency
 * ICC(1,k) = (BMS − WMS)/BMS;  ICC(2,k) = (BMS − EMS)/(BMS + (JMS − EMS)/n);  ICC(3,k) = (BMS − EMS)/BMS
 * (n targets, k judges). Intervals: F-based for forms 1 and 3; the Satterthwaite-type v of
 * Shrout & Fleiss for form 2 (real-valued df), as psych::ICC computes them. Negative estimates
 * are returned as computed (not truncated); BMS = 0 makes every form undefined (null).
 *
 * @see Shrout, P. E. & Fleiss, J. L. (1979) Psychological Bulletin 86, 420–428; McGraw & Wong (1996); methods notes §4.1.
 */
export type IccForm = 'ICC(1,1)' | 'ICC(2,1)' | 'ICC(3,1)' | 'ICC(1,k)' | 'ICC(2,k)' | 'ICC(3,k)';

export interface IccEstimate {
  form: IccForm;
  /** null when BMS = 0 (targets not differentiated). */
  value: number | null;
  F: number | null;
  dfNumerator: number;
  dfDenominator: number;
  pValue: number | null;
  lower: number | null;
  upper: number | null;
}

export interface ShroutFleissResult {
  meanSquares: TwoWayMeanSquares;
  confidenceLevel: number;
  estimates: IccEstimate[];
  /** Only for ICC(2,·): the approximate denominator df v of the interval. */
  icc2IntervalDf: number | null;
}

export function shroutFleissIcc(matrix: readonly (readonly number[])[], options: { confidenceLevel?: number } = {}): ShroutFleissResult {
  const confidenceLevel = options.confidenceLevel ?? 0.95;
  if (!(confidenceLevel > 0 && confidenceLevel < 1)) throw new Error('shroutFleissIcc: the confidence level must lie strictly between 0 and 1');
  const meanSquares = twoWayMeanSquares(matrix);
  const { nTargets: n, nJudges: k } = meanSquares;
  const bms = meanSquares.betweenTargetsMeanSquare;
  const jms = meanSquares.betweenJudgesMeanSquare;
  const ems = meanSquares.residualMeanSquare;
  const wms = meanSquares.withinTargetsMeanSquare;
  const upperProbability = 1 - (1 - confidenceLevel) / 2;

  const oneWay = { df1: n - 1, df2: n * (k - 1) };
  const twoWay = { df1: n - 1, df2: (n - 1) * (k - 1) };
  const fOneWay = wms > 0 ? bms / wms : null;
  const fTwoWay = ems > 0 ? bms / ems : null;
  const pOneWay = fOneWay === null ? null : fUpperTail(fOneWay, oneWay.df1, oneWay.df2);
  const pTwoWay = fTwoWay === null ? null : fUpperTail(fTwoWay, twoWay.df1, twoWay.df2);

  const undefinedForms = !(bms > 0);
  const icc11 = undefinedForms ? null : (bms - wms) / (bms + (k - 1) * wms);
  const icc21 = undefinedForms ? null : (bms - ems) / (bms + (k - 1) * ems + (k * (jms - ems)) / n);
  const icc31 = undefinedForms ? null : (bms - ems) / (bms + (k - 1) * ems);
  const icc1k = undefinedForms ? null : (bms - wms) / bms;
  const icc2k = undefinedForms ? null : (bms - ems) / (bms + (jms - ems) / n);
  const icc3k = undefinedForms ? null : (bms - ems) / bms;

  // F-method bounds for forms 1 and 3 (the F ratio divided / multiplied by its quantiles).
  const fBounds = (f: number | null, df1: number, df2: number) =>
    f === null ? null : { fLower: f / fQuantile(upperProbability, df1, df2), fUpper: f * fQuantile(upperProbability, df2, df1) };
  const one = undefinedForms ? null : fBounds(fOneWay, oneWay.df1, oneWay.df2);
  const three = undefinedForms ? null : fBounds(fTwoWay, twoWay.df1, twoWay.df2);
  const single = (f: number) => (f - 1) / (f + k - 1);
  const average = (f: number) => 1 - 1 / f;

  // ICC(2,1) interval with Satterthwaite-type df v (Shrout & Fleiss eq. for case 2).
  let icc2IntervalDf: number | null = null;
  let lower21: number | null = null;
  let upper21: number | null = null;
  if (icc21 !== null && ems > 0) {
    const fJudges = jms / ems;
    const term = k * icc21 * fJudges + n * (1 + (k - 1) * icc21) - k * icc21;
    const v = ((k - 1) * (n - 1) * term * term) / ((n - 1) * k * k * icc21 * icc21 * fJudges * fJudges + (n * (1 + (k - 1) * icc21) - k * icc21) ** 2);
    icc2IntervalDf = v;
    const fStar = fQuantile(upperProbability, n - 1, v);
    const fStarStar = fQuantile(upperProbability, v, n - 1);
    lower21 = (n * (bms - fStar * ems)) / (fStar * (k * jms + (k * n - k - n) * ems) + n * bms);
    upper21 = (n * (fStarStar * bms - ems)) / (k * jms + (k * n - k - n) * ems + n * fStarStar * bms);
  }
  const toAverage = (value: number | null) => (value === null ? null : (k * value) / (1 + (k - 1) * value));

  const estimates: IccEstimate[] = [
    { form: 'ICC(1,1)', value: icc11, F: fOneWay, dfNumerator: oneWay.df1, dfDenominator: oneWay.df2, pValue: pOneWay, lower: one ? single(one.fLower) : null, upper: one ? single(one.fUpper) : null },
    { form: 'ICC(2,1)', value: icc21, F: fTwoWay, dfNumerator: twoWay.df1, dfDenominator: twoWay.df2, pValue: pTwoWay, lower: lower21, upper: upper21 },
    { form: 'ICC(3,1)', value: icc31, F: fTwoWay, dfNumerator: twoWay.df1, dfDenominator: twoWay.df2, pValue: pTwoWay, lower: three ? single(three.fLower) : null, upper: three ? single(three.fUpper) : null },
    { form: 'ICC(1,k)', value: icc1k, F: fOneWay, dfNumerator: oneWay.df1, dfDenominator: oneWay.df2, pValue: pOneWay, lower: one ? average(one.fLower) : null, upper: one ? average(one.fUpper) : null },
    { form: 'ICC(2,k)', value: icc2k, F: fTwoWay, dfNumerator: twoWay.df1, dfDenominator: twoWay.df2, pValue: pTwoWay, lower: toAverage(lower21), upper: toAverage(upper21) },
    { form: 'ICC(3,k)', value: icc3k, F: fTwoWay, dfNumerator: twoWay.df1, dfDenominator: twoWay.df2, pValue: pTwoWay, lower: three ? average(three.fLower) : null, upper: three ? average(three.fUpper) : null },
  ];
  return { meanSquares, confidenceLevel, estimates, icc2IntervalDf };
}
