/**
 * An unexpected error inside one fit (a fault of the program, not a data condition) must not stop
 * the other groups: it is handed to onFitFailure with the group, the group is listed as not fitted
 * with code "fit-failed", and the rest of the analysis is returned.
 */
import { describe, expect, it, vi } from 'vitest';
import type { Observation, RatingGroup } from '../../domain/ratings.js';

vi.mock('../../analysis/lmm/fit-session-model.js', async (importOriginal) => {
  const original = await importOriginal<typeof import('../../analysis/lmm/fit-session-model.js')>();
  return {
    ...original,
    fitSessionGroup: (group: RatingGroup) => {
      if (group.attribute === 'bitterness') throw new TypeError('a planted fault');
      return original.fitSessionGroup(group);
    },
  };
});

const { analyzeRatingsWithNotes, UNEXPECTED_FIT_FAILURE } = await import('../../analysis/analyze-ratings.js');

function session(attribute: string): Observation[] {
  const rows: Observation[] = [];
  for (let a = 0; a < 4; a++) {
    for (let p = 0; p < 3; p++) {
      for (let r = 1; r <= 2; r++) rows.push({ session: 'S1', attribute, assessor: `A${a}`, product: `P${p}`, replicate: r, value: 3 + p + ((a * 7 + p * 3 + r * 5) % 4) * 0.5 });
    }
  }
  return rows;
}

describe('analyzeRatingsWithNotes with a fault in one fit', () => {
  it('reports the fault to onFitFailure, lists the group as fit-failed and fits the others', () => {
    const failures: { error: unknown; where: { session: string | null; attribute: string } }[] = [];
    const { json, notes } = analyzeRatingsWithNotes([...session('bitterness'), ...session('sweetness')], {
      period: false,
      onFitFailure: (error, where) => failures.push({ error, where }),
    });
    expect(json.fits.map((fit) => fit.attribute)).toEqual(['sweetness']);
    expect(failures).toHaveLength(1);
    expect(failures[0].error).toBeInstanceOf(TypeError);
    expect(failures[0].where).toEqual({ session: 'S1', attribute: 'bitterness' });
    expect(json.notFitted).toEqual([{ session: 'S1', attribute: 'bitterness', model: 'session', status: 'not-fitted', code: 'fit-failed', reason: UNEXPECTED_FIT_FAILURE }]);
    expect(notes[0].message).toBe(`could not be fitted: ${UNEXPECTED_FIT_FAILURE}`);
    expect(json.assessorIndices.some((row) => row.attribute === 'bitterness')).toBe(true);
  });
});
