/**
 * The EWMA sizing grid shipped for the default λ (analysis/monitor/arl-grid-default.ts) must be
 * exactly what computeLogArlGrid computes (Brook–Evans chains): the limits sized from it are then
 * the same as before it was precomputed. The grid itself is checked against published ARLs by
 * the EWMA tests (ewmaArl against Lucas & Saccucci 1990).
 */
import { describe, expect, it } from 'vitest';
import { DEFAULT_LAMBDA_GRID } from '../../../analysis/monitor/arl-grid-default.js';
import { DEFAULT_THRESHOLDS } from '../../../analysis/flags/settings.js';
import { computeLogArlGrid } from '../../../analysis/monitor/unconditional.js';

describe('precomputed EWMA sizing grid', () => {
  it('is for the default λ of the settings', () => {
    expect(DEFAULT_LAMBDA_GRID.lambda).toBe(DEFAULT_THRESHOLDS.charts.ewmaLambda);
  });

  it('equals a fresh computation, value for value', () => {
    const fresh = computeLogArlGrid(DEFAULT_LAMBDA_GRID.lambda);
    expect(fresh.length).toBe(DEFAULT_LAMBDA_GRID.logArl.length);
    fresh.forEach((row, i) => {
      expect(row.length).toBe(DEFAULT_LAMBDA_GRID.logArl[i].length);
      row.forEach((value, j) => expect(Object.is(value, DEFAULT_LAMBDA_GRID.logArl[i][j])).toBe(true));
    });
  });
});
