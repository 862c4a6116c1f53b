/**
 * Shared by the index and reliability tests: turning the column-wise data of the R fixtures into
 * observations, and comparing numbers-or-null with a tolerance.
 */
import { readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { expect } from 'vitest';
import type { Observation } from '../../../domain/ratings.js';

const here = dirname(fileURLToPath(import.meta.url));
export const FIXTURE_DIR = join(here, '..', '..', 'fixtures', 'json');
/** GPL (>= 2) test data of lmerTest, written by the R scripts beside the fixtures (see its README). */
export const GPL_DATA_DIR = join(FIXTURE_DIR, 'gpl');

/**
 * Classic indices against plain R on the same data: the tolerance is 1e-9. Observed
 * largest scaled difference: 8.3e-15 on the seeded designs, 5.1e-14 on TVbo (the fixtures carry
 * 15 significant digits); the "worst deviation" tests print and bound it.
 */
export const CLASSIC_INDEX_TOLERANCE = 1e-9;

export interface ColumnData {
  assessor: string[];
  product: string[];
  replicate: number[];
  value: number[];
}

export function readFixture<T>(name: string): T {
  return JSON.parse(readFileSync(join(FIXTURE_DIR, name), 'utf8')) as T;
}

export function readGplData<T>(name: string): T {
  return JSON.parse(readFileSync(join(GPL_DATA_DIR, name), 'utf8')) as T;
}

export function toObservations(data: ColumnData, session: string, attribute: string): Observation[] {
  return data.value.map((value, i) => ({
    session,
    attribute,
    assessor: String(data.assessor[i]),
    product: String(data.product[i]),
    replicate: data.replicate[i],
    value,
  }));
}

/** |actual − expected| ≤ tol · max(1, |expected|); null must match null. Records the worst deviation seen. */
export function expectCloseOrNull(actual: number | null | undefined, expected: number | null, label: string, tolerance = CLASSIC_INDEX_TOLERANCE): void {
  if (expected === null) {
    expect(actual ?? null, `${label}: expected null`).toBeNull();
    return;
  }
  expect(actual, `${label}: expected ${expected}`).not.toBeNull();
  expect(actual, `${label}: expected ${expected}`).toBeTypeOf('number');
  const deviation = Math.abs((actual as number) - expected) / Math.max(1, Math.abs(expected));
  deviationLog.worst = Math.max(deviationLog.worst, deviation);
  expect(deviation, `${label}: got ${actual}, expected ${expected}`).toBeLessThanOrEqual(tolerance);
}

/**
 * p-values: since analysis/distributions evaluates the incomplete beta to ~1e-15 (jstat's own
 * stopped at 3e-7 and gave 1.9e-7 relative error on TVbo), they meet the classic-index
 * tolerance of 1e-9 relative. Relative, because a tiny p-value passes any absolute tolerance.
 */
export const P_VALUE_RELATIVE_TOLERANCE = 1e-9;

export function expectPValueClose(actual: number | null | undefined, expected: number | null, label: string, relativeTolerance = P_VALUE_RELATIVE_TOLERANCE): void {
  if (expected === null) {
    expect(actual ?? null, `${label}: expected null`).toBeNull();
    return;
  }
  expect(actual, `${label}: expected ${expected}`).toBeTypeOf('number');
  const relative = Math.abs((actual as number) - expected) / Math.max(expected, 1e-300);
  deviationLog.worstPValue = Math.max(deviationLog.worstPValue, relative);
  expect(relative, `${label}: p ${actual} vs ${expected}`).toBeLessThanOrEqual(relativeTolerance);
}

/** Worst deviations seen in a test file (statistics: scaled absolute; p-values: relative). */
export const deviationLog = { worst: 0, worstPValue: 0 };
