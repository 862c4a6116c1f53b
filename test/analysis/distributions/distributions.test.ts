/**
 * The jstat wrappers must pass published quantile tables and deep-tail identities before
 * anything built on them is trusted.
 */
import { describe, expect, it } from 'vitest';
import {
  boundaryLrtPValue,
  chiSquareQuantile,
  chiSquareUpperTail,
  fQuantile,
  fUpperTail,
  normalQuantile,
  tQuantile,
  tTwoSidedP,
  tUpperTail,
} from '../../../analysis/distributions/index.js';

// NIST/SEMATECH e-Handbook of Statistical Methods (2012), section 1.3.6.7.2, "Critical values of
// the Student's t distribution" (cells as printed there, 3 decimals; that these exact cells are in
// the table is from memory). Each value equals R's qt() rounded to 3 decimals (R 4.2.2).
const T_TABLE: Array<[number, number, number]> = [
  // [df, upper-tail probability level 1 - alpha, quantile]
  [1, 0.9, 3.078], [1, 0.95, 6.314], [1, 0.975, 12.706], [1, 0.99, 31.821], [1, 0.995, 63.657],
  [2, 0.9, 1.886], [2, 0.95, 2.92], [2, 0.975, 4.303], [2, 0.99, 6.965], [2, 0.995, 9.925], [2, 0.999, 22.327],
  [5, 0.9, 1.476], [5, 0.95, 2.015], [5, 0.975, 2.571], [5, 0.99, 3.365], [5, 0.995, 4.032], [5, 0.999, 5.893],
  [10, 0.9, 1.372], [10, 0.95, 1.812], [10, 0.975, 2.228], [10, 0.99, 2.764], [10, 0.995, 3.169], [10, 0.999, 4.144],
  [20, 0.9, 1.325], [20, 0.95, 1.725], [20, 0.975, 2.086], [20, 0.99, 2.528], [20, 0.995, 2.845], [20, 0.999, 3.552],
  [30, 0.9, 1.31], [30, 0.95, 1.697], [30, 0.975, 2.042], [30, 0.99, 2.457], [30, 0.995, 2.75], [30, 0.999, 3.385],
  [100, 0.9, 1.29], [100, 0.95, 1.66], [100, 0.975, 1.984], [100, 0.99, 2.364], [100, 0.995, 2.626], [100, 0.999, 3.174],
];

// NIST/SEMATECH e-Handbook 1.3.6.7.3, "Upper critical values of the F distribution"; same caveat.
const F_TABLE: Array<[number, number, number, number]> = [
  // [df1, df2, alpha, upper critical value]
  [1, 1, 0.1, 39.863], [1, 1, 0.05, 161.448], [1, 1, 0.01, 4052.181],
  [1, 10, 0.1, 3.285], [1, 10, 0.05, 4.965], [1, 10, 0.01, 10.044],
  [2, 20, 0.1, 2.589], [2, 20, 0.05, 3.493], [2, 20, 0.01, 5.849],
  [3, 24, 0.1, 2.327], [3, 24, 0.05, 3.009], [3, 24, 0.01, 4.718],
  [4, 10, 0.1, 2.605], [4, 10, 0.05, 3.478], [4, 10, 0.01, 5.994],
  [5, 15, 0.1, 2.273], [5, 15, 0.05, 2.901], [5, 15, 0.01, 4.556],
  [10, 10, 0.1, 2.323], [10, 10, 0.05, 2.978], [10, 10, 0.01, 4.849],
];

describe('quantiles against the NIST/SEMATECH e-Handbook tables (2012, section 1.3.6.7)', () => {
  it.each(T_TABLE)('t quantile df=%d, level %d', (df, level, printed) => {
    expect(Math.abs(tQuantile(level, df) - printed)).toBeLessThanOrEqual(0.0005 + 1e-12);
  });

  it('t quantile df=1, level 0.999 (NIST prints 318.313, R gives 318.309: table rounding)', () => {
    expect(Math.abs(tQuantile(0.999, 1) - 318.309)).toBeLessThan(0.005);
  });

  it.each(F_TABLE)('F critical value (%d, %d) at alpha %d', (df1, df2, alpha, printed) => {
    expect(Math.abs(fQuantile(1 - alpha, df1, df2) - printed)).toBeLessThanOrEqual(0.0005 + 1e-9 * printed);
  });

  it('chi-square and normal quantiles (NIST 1.3.6.7.4 and 1.3.6.7.1)', () => {
    expect(chiSquareQuantile(0.95, 1)).toBeCloseTo(3.8415, 4);
    expect(chiSquareQuantile(0.9, 1)).toBeCloseTo(2.7055, 4);
    expect(chiSquareQuantile(0.95, 2)).toBeCloseTo(5.9915, 4);
    expect(chiSquareQuantile(0.95, 11)).toBeCloseTo(19.6751, 4);
    expect(normalQuantile(0.975)).toBeCloseTo(1.95996, 5);
    expect(normalQuantile(0.995)).toBeCloseTo(2.57583, 5);
  });
});

describe('upper tails computed directly (values from R 4.2.2 pf/pt/pchisq with lower.tail = FALSE)', () => {
  const relative = (actual: number, expected: number) => Math.abs(actual - expected) / Math.abs(expected);

  it('F tail of the ergoStool product test, F = 22.3556 on (3, 24)', () => {
    expect(relative(fUpperTail(22.3556, 3, 24), 3.934626e-7)).toBeLessThan(1e-6);
  });

  it('F tail far below 1e-16 where 1 - CDF would return 0', () => {
    expect(relative(fUpperTail(200, 11, 1119.2), 4.494097e-255)).toBeLessThan(1e-6);
  });

  it('two-sided t, t = 3.4971 on 11 df', () => {
    expect(relative(tTwoSidedP(3.4971, 11), 0.004995726)).toBeLessThan(1e-6);
    expect(relative(tTwoSidedP(-3.4971, 11), 0.004995726)).toBeLessThan(1e-6);
    expect(tUpperTail(3.4971, 11) * 2).toBeCloseTo(tTwoSidedP(3.4971, 11), 15);
  });

  it('chi-square tails, including the deep tail', () => {
    expect(relative(chiSquareUpperTail(3.841459, 1), 0.05)).toBeLessThan(1e-5);
    // R: pchisq(500, 3, lower.tail = FALSE) = 4.771672e-108
    expect(relative(chiSquareUpperTail(500, 3), 4.771672e-108)).toBeLessThan(1e-6);
  });

  it('edge values', () => {
    expect(fUpperTail(0, 3, 10)).toBe(1);
    expect(fUpperTail(Infinity, 3, 10)).toBe(0);
    expect(Number.isNaN(fUpperTail(Number.NaN, 3, 10))).toBe(true);
    expect(tTwoSidedP(Infinity, 5)).toBe(0);
    expect(chiSquareUpperTail(0, 2)).toBe(1);
  });
});

describe('boundary likelihood-ratio test: 50:50 mixture of chi2_0 and chi2_1 (Self & Liang 1987)', () => {
  it('5% critical value is the chi2_1 upper 10% point 2.7055', () => {
    expect(boundaryLrtPValue(2.705543)).toBeCloseTo(0.05, 6);
    expect(boundaryLrtPValue(3.841459)).toBeCloseTo(0.025, 6);
  });
  it('LR of zero or below (numerical noise) gives p = 1', () => {
    expect(boundaryLrtPValue(0)).toBe(1);
    expect(boundaryLrtPValue(-1e-9)).toBe(1);
  });
});

import fixture from '../../fixtures/json/distributions.json' with { type: 'json' };

// Observed worst relative errors against R 4.2.2 on this grid (2026-12): tails 1.8e-11
// (chi-square, df 50: log-gamma of jstat's Lanczos series), quantiles 8.8e-10 (qf at p = 0.001).
// jstat's own incomplete beta was off by up to 2e-7, which these bounds would catch.
const TAIL_RELATIVE_TOLERANCE = 1e-10;
const QUANTILE_RELATIVE_TOLERANCE = 1e-8;

function relativeError(actual: number, expected: number): number {
  if (expected === 0) return Math.abs(actual);
  return Math.abs(actual - expected) / Math.abs(expected);
}

describe('grid against R pf/pt/pchisq/qf/qt/qchisq (test/fixtures/r/distributions.R)', () => {
  it('F upper tails, including deep tails and real-valued df', () => {
    for (const row of fixture.fUpper) {
      const error = relativeError(fUpperTail(row.f, row.df1, row.df2), row.upper);
      expect(error, `F=${row.f} (${row.df1}, ${row.df2})`).toBeLessThan(TAIL_RELATIVE_TOLERANCE);
    }
  });
  it('two-sided t tails', () => {
    for (const row of fixture.tTwoSided) {
      const error = relativeError(tTwoSidedP(row.t, row.df), row.twoSided);
      expect(error, `t=${row.t} df=${row.df}`).toBeLessThan(TAIL_RELATIVE_TOLERANCE);
    }
  });
  it('chi-square upper tails', () => {
    for (const row of fixture.chiSquareUpper) {
      const error = relativeError(chiSquareUpperTail(row.x, row.df), row.upper);
      expect(error, `x=${row.x} df=${row.df}`).toBeLessThan(TAIL_RELATIVE_TOLERANCE);
    }
  });
  it('F, t and chi-square quantiles', () => {
    for (const row of fixture.fQuantile) {
      expect(relativeError(fQuantile(row.p, row.df1, row.df2), row.quantile), `qf ${JSON.stringify(row)}`).toBeLessThan(QUANTILE_RELATIVE_TOLERANCE);
    }
    for (const row of fixture.tQuantile) {
      expect(relativeError(tQuantile(row.p, row.df), row.quantile), `qt ${JSON.stringify(row)}`).toBeLessThan(QUANTILE_RELATIVE_TOLERANCE);
    }
    for (const row of fixture.chiSquareQuantile) {
      expect(relativeError(chiSquareQuantile(row.p, row.df), row.quantile), `qchisq ${JSON.stringify(row)}`).toBeLessThan(QUANTILE_RELATIVE_TOLERANCE);
    }
  });
});
