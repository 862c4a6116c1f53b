/**
 * Seeded ratings of one session for the data-quality tests: rating = product profile + assessor
 * level + assessor×product interaction (SD 0.3) + replicate noise (SD 0.5), rounded to 0.1 and
 * kept on the scale. Sample codes are three-digit strings unique per assessor × product × replicate.
 */
import type { Rating } from '../../../../domain/ratings.js';
import { seededRandom } from './random.js';

export interface RatingsOptions {
  seed: number;
  session?: string;
  date?: string;
  nAssessors?: number;
  products?: string[];
  nAttributes?: number;
  nReplicates?: number;
  scaleMax?: number;
  /** Product profiles [product][attribute]; default uniform on 20–80 % of the scale. */
  profiles?: number[][];
}

export function syntheticRatings(options: RatingsOptions): Rating[] {
  const rng = seededRandom(options.seed);
  const session = options.session ?? 'S01';
  const date = options.date ?? '2026-01-05';
  const products = options.products ?? ['P1', 'P2', 'P3', 'P4', 'P5', 'P6'];
  const nAssessors = options.nAssessors ?? 8;
  const nAttributes = options.nAttributes ?? 8;
  const nReplicates = options.nReplicates ?? 2;
  const scaleMax = options.scaleMax ?? 10;
  const unit = scaleMax / 10;
  const profiles = options.profiles ?? products.map(() => Array.from({ length: nAttributes }, () => (2 + 6 * rng.uniform()) * unit));
  const out: Rating[] = [];
  for (let a = 0; a < nAssessors; a++) {
    const assessor = `A${String(a + 1).padStart(2, '0')}`;
    const level = rng.normal(0, 0.3) * unit;
    const interaction = products.map(() => Array.from({ length: nAttributes }, () => rng.normal(0, 0.3) * unit));
    products.forEach((product, p) => {
      for (let r = 1; r <= nReplicates; r++) {
        const code = String(100 + ((a * 37 + p * 101 + r * 53) % 900));
        for (let j = 0; j < nAttributes; j++) {
          const raw = profiles[p][j] + level + interaction[p][j] + rng.normal(0, 0.5) * unit;
          const value = Math.min(scaleMax, Math.max(0, Math.round(raw * 10) / 10));
          out.push({ session, date, assessor, product, replicate: r, attribute: `attr${j + 1}`, value, code });
        }
      }
    });
  }
  return out;
}

/** Exchanges the values of two products for one assessor and replicate (all attributes). */
export function swapProducts(ratings: Rating[], assessor: string, replicate: number, productA: string, productB: string): Rating[] {
  const key = (r: Rating) => `${r.session}\u0000${r.attribute}`;
  const a = new Map(ratings.filter((r) => r.assessor === assessor && r.replicate === replicate && r.product === productA).map((r) => [key(r), r.value]));
  const b = new Map(ratings.filter((r) => r.assessor === assessor && r.replicate === replicate && r.product === productB).map((r) => [key(r), r.value]));
  return ratings.map((r) => {
    if (r.assessor !== assessor || r.replicate !== replicate) return r;
    if (r.product === productA) return { ...r, value: b.get(key(r)) as number };
    if (r.product === productB) return { ...r, value: a.get(key(r)) as number };
    return r;
  });
}

export function attributesOf(nAttributes: number, scaleMax = 10) {
  return Array.from({ length: nAttributes }, (_, j) => ({ name: `attr${j + 1}`, scaleMin: 0, scaleMax }));
}
