/**
 * Seeded pseudo-random numbers for the H5 tests: the demo's generator (demo/random.ts, mulberry32
 * with Box–Muller normals) with a mean/SD convenience. Not for cryptography.
 */
import { createRandom } from '../../../../demo/random.js';

export interface Random {
  uniform(): number;
  normal(mean?: number, sd?: number): number;
  integer(maxExclusive: number): number;
}

export function seededRandom(seed: number): Random {
  const source = createRandom(seed);
  return { uniform: source.uniform, normal: (mean = 0, sd = 1) => mean + sd * source.normal(), integer: source.integer };
}
