/** codeIds (levels from name ids, the analyze path) must give exactly codeLevels' levels and codes. */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { codeIds, codeLevels } from '../../../analysis/lmm/session-checks.js';

describe('codeIds', () => {
  it('equals codeLevels on the names the ids stand for, with ids not dense in the group', () => {
    fc.assert(
      fc.property(fc.uniqueArray(fc.string({ minLength: 1, maxLength: 4 }), { minLength: 1, maxLength: 12 }), fc.array(fc.nat(), { minLength: 1, maxLength: 60 }), (names, picks) => {
        const ids = Int32Array.from(picks, (pick) => pick % names.length);
        const expected = codeLevels(Array.from(ids, (id) => names[id]));
        const got = codeIds(ids, names);
        expect(got.levels).toEqual(expected.levels);
        expect(Array.from(got.codes)).toEqual(Array.from(expected.codes));
      }),
    );
  });
});
