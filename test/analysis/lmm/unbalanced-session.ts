/** Invented unbalanced sessions for property tests of the one-session fit (not a fixture). */
import type { Observation } from '../../../domain/ratings.js';
import { compareLevels } from '../../../analysis/lmm/model-frame.js';
import { makeSessionCriterion, type SessionCriterion } from '../../../analysis/lmm/session-criterion.js';
import { seededRandom } from '../../../analysis/reliability/seeded-random.js';

/** Sorted levels (as the model frame) and each value's level index. */
export function codes(values: string[]): { levels: string[]; codes: Int32Array } {
  const levels = [...new Set(values)].sort(compareLevels);
  return { levels, codes: Int32Array.from(values, (value) => levels.indexOf(value)) };
}

/** The cell-sum criterion of one session's ratings. */
export function sessionCriterionOf(observations: Observation[], withInteraction: boolean): SessionCriterion {
  const assessors = codes(observations.map((row) => row.assessor));
  const products = codes(observations.map((row) => row.product));
  return makeSessionCriterion(
    observations.map((row) => row.value),
    assessors.codes,
    products.codes,
    assessors.levels.length,
    products.levels.length,
    withInteraction,
  );
}

/** An unbalanced session: each rating kept with probability 1 − dropShare, some whole cells dropped, replicates 1–3 per cell. */
export function unbalancedSession(seed: number, nAssessors: number, nProducts: number, dropShare: number, sdAssessor: number, sdInteraction: number): Observation[] {
  const random = seededRandom(seed);
  const gaussian = (): number => Math.sqrt(-2 * Math.log(1 - random())) * Math.cos(2 * Math.PI * random());
  const rows: Observation[] = [];
  for (let a = 0; a < nAssessors; a++) {
    const level = sdAssessor * gaussian();
    for (let p = 0; p < nProducts; p++) {
      const cellEffect = sdInteraction * gaussian();
      if (random() < 0.08) continue;
      const replicates = 1 + Math.floor(random() * 3);
      for (let r = 1; r <= replicates; r++) {
        const value = Math.round((4 + 0.4 * p + level + cellEffect + 0.7 * gaussian()) * 100) / 100;
        if (random() >= dropShare) rows.push({ session: 'S1', attribute: 'sweet', assessor: `J${a + 1}`, product: `P${(p * 7) % 10}${p}`, replicate: r, value });
      }
    }
  }
  return rows;
}
