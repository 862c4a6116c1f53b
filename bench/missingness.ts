/**
 * Missing data as real panels produce it, for the benchmarks: a share of single ratings missing
 * at random (a skipped line on a ballot) plus a few whole assessor × product cells of a session
 * missing on every attribute and replicate (a sample not served or not tasted). Seeded, and drawn
 * from a stream of its own, so the complete data underneath stay the same.
 */
import { seededRandom } from '../analysis/reliability/seeded-random.js';

export interface MissingnessOptions {
  seed: number;
  /** Share of the remaining ratings dropped one by one, at random (e.g. 0.03). */
  missingShare: number;
  /** Number of (session, assessor, product) cells dropped whole. */
  emptyCells: number;
}

interface Keyed {
  session: string;
  assessor: string;
  product: string;
}

export function dropRatings<T extends Keyed>(rows: readonly T[], options: MissingnessOptions): T[] {
  const uniform = seededRandom(options.seed);
  const cellKey = (row: Keyed): string => `${row.session}\u0000${row.assessor}\u0000${row.product}`;
  const cells = [...new Set(rows.map(cellKey))].sort();
  const empty = new Set<string>();
  while (empty.size < Math.min(options.emptyCells, cells.length)) empty.add(cells[Math.floor(uniform() * cells.length)]);
  return rows.filter((row) => !empty.has(cellKey(row)) && uniform() >= options.missingShare);
}
