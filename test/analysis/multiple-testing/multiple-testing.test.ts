/**
 * Benjamini–Hochberg and Benjamini–Yekutieli against the published example and R's p.adjust
 * (fixture indices-examples.json from test/fixtures/r/indices.R).
 */
import { describe, expect, it } from 'vitest';
import { benjaminiHochberg } from '../../../analysis/multiple-testing/benjamini-hochberg.js';
import { benjaminiYekutieli } from '../../../analysis/multiple-testing/benjamini-yekutieli.js';
import { expectCloseOrNull, readFixture } from '../indices/fixture-helpers.js';

/** Same arithmetic as p.adjust in the same order: observed differences ≤ 1e-16. */
const ADJUSTED_TOLERANCE = 1e-12;

interface Family {
  p: (number | null)[];
  bh: (number | null)[];
  by: (number | null)[];
  bhRejected05: boolean[];
  byRejected05: boolean[];
}
const examples = readFixture<{ benjaminiHochberg1995: Family; randomFamily: Family }>('indices-examples.json');

function compareFamily(family: Family, label: string): void {
  const bh = benjaminiHochberg(family.p, 0.05);
  const by = benjaminiYekutieli(family.p, 0.05);
  family.p.forEach((_, i) => {
    expectCloseOrNull(bh.adjusted[i], family.bh[i], `${label} BH[${i}]`, ADJUSTED_TOLERANCE);
    expectCloseOrNull(by.adjusted[i], family.by[i], `${label} BY[${i}]`, ADJUSTED_TOLERANCE);
  });
  // Step-up rejection at q = 0.05 is the same as "adjusted ≤ 0.05" (R's convention).
  expect(bh.rejected).toEqual(family.bhRejected05);
  expect(by.rejected).toEqual(family.byRejected05);
  expect(bh.nTests).toBe(family.p.filter((p) => p !== null).length);
}

describe('Benjamini & Hochberg (1995), the 15 p-values of their example', () => {
  it('rejects the 4 smallest at q = 0.05 (0.0095 ≤ 4·0.05/15; the paper\'s conclusion as recalled in methods §7.11)', () => {
    const result = benjaminiHochberg(examples.benjaminiHochberg1995.p, 0.05);
    expect(result.rejected.filter(Boolean)).toHaveLength(4);
    expect(result.rejected.slice(0, 4)).toEqual([true, true, true, true]);
  });

  it('adjusted values equal p.adjust(p, "BH") and "BY"', () => {
    compareFamily(examples.benjaminiHochberg1995, 'BH1995');
    expect(benjaminiHochberg(examples.benjaminiHochberg1995.p).adjusted[3]).toBeCloseTo(0.035625, 12); // methods §7.11
  });
});

describe('a random family with untested (null) entries', () => {
  it('equals p.adjust, nulls left out of m and returned as null', () => {
    compareFamily(examples.randomFamily, 'random');
    expect(examples.randomFamily.p.some((p) => p === null)).toBe(true);
  });

  it('order does not matter and BY is never below BH', () => {
    const p = examples.randomFamily.p;
    const reversed = [...p].reverse();
    const forward = benjaminiHochberg(p).adjusted;
    expect(benjaminiHochberg(reversed).adjusted).toEqual([...forward].reverse());
    const by = benjaminiYekutieli(p).adjusted;
    forward.forEach((value, i) => {
      if (value !== null) expect(by[i]!).toBeGreaterThanOrEqual(value);
    });
  });

  it('refuses a value that is not a probability and an FDR level outside (0, 1)', () => {
    expect(() => benjaminiHochberg([0.2, 1.5])).toThrow(/not a probability/);
    expect(() => benjaminiHochberg([0.2], 0)).toThrow(/FDR level/);
    expect(benjaminiHochberg([null, null])).toEqual({ adjusted: [null, null], rejected: [false, false], nTests: 0 });
  });
});
