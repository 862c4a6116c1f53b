import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { InputFinding, InputProblem } from '../../domain/problems.js';
import type { Rating, ScaleRange } from '../../domain/ratings.js';
import { readRatings, type InputSource, type RawCell, type ReadEvent, type ReadRatingsOptions } from '../../ingest/read-ratings.js';

export const FIXTURE_DIR = join(dirname(fileURLToPath(import.meta.url)), '..', 'fixtures', 'files');
export const fixturePath = (name: string): string => join(FIXTURE_DIR, name);

export const SCALE_0_10: ScaleRange = { min: 0, max: 10 };

export interface ReadResult {
  events: ReadEvent[];
  ratings: Rating[];
  ratingEvents: Extract<ReadEvent, { type: 'rating' }>[];
  problems: InputProblem[];
  problemEvents: Extract<ReadEvent, { type: 'problem' }>[];
  missing: Extract<ReadEvent, { type: 'missing' }>[];
  findings: InputFinding[];
  /** Value cells handed to the quarantine (cell + moreCells of every problem). */
  rejectedCells: RawCell[];
}

export async function readAll(source: InputSource, options: Partial<ReadRatingsOptions> = {}): Promise<ReadResult> {
  const events: ReadEvent[] = [];
  for await (const event of readRatings(source, { fileName: 'upload.csv', scaleFor: () => SCALE_0_10, ...options })) events.push(event);
  const pick = <T extends ReadEvent['type']>(type: T) => events.filter((e): e is Extract<ReadEvent, { type: T }> => e.type === type);
  const problemEvents = pick('problem');
  return {
    events,
    ratingEvents: pick('rating'),
    ratings: pick('rating').map((e) => e.rating),
    problemEvents,
    problems: problemEvents.map((e) => e.problem),
    missing: pick('missing'),
    findings: pick('finding').map((e) => e.finding),
    rejectedCells: problemEvents.flatMap((e) => [...(e.cell ? [e.cell] : []), ...(e.moreCells ?? [])]),
  };
}

export const readFixture = (name: string, options: Partial<ReadRatingsOptions> = {}): Promise<ReadResult> =>
  readAll({ path: fixturePath(name) }, { fileName: name, ...options });

export const readText = (text: string, options: Partial<ReadRatingsOptions> = {}): Promise<ReadResult> =>
  readAll({ bytes: Buffer.from(text, 'utf8') }, options);

/** Ratings in a stable order, for comparing streams that differ in row order. */
export function sortRatings(ratings: Rating[]): Rating[] {
  const key = (r: Rating): string => [r.session, r.assessor, r.product, String(r.replicate).padStart(4, '0'), r.attribute].join('\u0001');
  return [...ratings].sort((a, b) => (key(a) < key(b) ? -1 : key(a) > key(b) ? 1 : 0));
}

/** [row, column, code] of each problem, for exact location checks. */
export const where = (problems: InputProblem[]): [number | null, string | null, string][] => problems.map((p) => [p.row, p.column, p.code]);
