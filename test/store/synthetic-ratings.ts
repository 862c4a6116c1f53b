/**
 * Invented, seeded panel data for store tests, the crash test and the import benchmark:
 * a long-form CSV written in chunks (never held whole in memory).
 */
import { createWriteStream } from 'node:fs';
import { once } from 'node:events';

export interface SyntheticDesign {
  sessions: number;
  assessors: number;
  products: number;
  replicates: number;
  attributes: number;
  seed?: number;
  /** First session date (YYYY-MM-DD); sessions are a week apart. */
  startDate?: string;
}

export const nRatingsOf = (d: SyntheticDesign): number => d.sessions * d.assessors * d.products * d.replicates * d.attributes;

/** A design with about `target` ratings: 12 assessors × 6 products × 2 replicates × 10 attributes per session. */
export function designForRatings(target: number, seed = 1): SyntheticDesign {
  const perSession = 12 * 6 * 2 * 10;
  return { sessions: Math.max(1, Math.round(target / perSession)), assessors: 12, products: 6, replicates: 2, attributes: 10, seed };
}

/** Park–Miller style LCG: enough for invented ratings, reproducible from the seed. */
function makeRandom(seed: number): () => number {
  let state = (seed * 48271) % 2147483647 || 1;
  return () => {
    state = (state * 48271) % 2147483647;
    return state / 2147483647;
  };
}

function addDays(date: string, days: number): string {
  const t = new Date(`${date}T00:00:00Z`);
  t.setUTCDate(t.getUTCDate() + days);
  return t.toISOString().slice(0, 10);
}

const ATTRIBUTE_NAMES = ['crunchiness', 'saltiness', 'oiliness', 'potato flavour', 'sweetness', 'bitterness', 'hardness', 'colour', 'roasted', 'aftertaste', 'vinegar', 'cheese'];

export function attributeName(i: number): string {
  return ATTRIBUTE_NAMES[i] ?? `attribute ${i + 1}`;
}

/** Yields the CSV lines (header first), values on a 0–10 scale with one decimal. */
export function* syntheticLongLines(d: SyntheticDesign): Generator<string> {
  const random = makeRandom(d.seed ?? 1);
  const start = d.startDate ?? '2025-01-06';
  yield 'session,date,assessor,product,replicate,attribute,value,code';
  for (let s = 0; s < d.sessions; s++) {
    const label = `W${String(s + 1).padStart(3, '0')}`;
    const date = addDays(start, 7 * s);
    for (let a = 0; a < d.assessors; a++) {
      const assessor = `A${String(a + 1).padStart(2, '0')}`;
      for (let p = 0; p < d.products; p++) {
        const product = p === 0 ? 'REF' : `P${p}`;
        for (let r = 1; r <= d.replicates; r++) {
          const code = String(100 + ((s * 37 + p * 11 + r * 5) % 900));
          for (let t = 0; t < d.attributes; t++) {
            const value = Math.round(Math.min(10, Math.max(0, 5 + (random() - 0.5) * 6 + (p - 2) * 0.4)) * 10) / 10;
            yield `${label},${date},${assessor},${product},${r},${attributeName(t)},${value},${code}`;
          }
        }
      }
    }
  }
}

/** Writes the design as a long CSV file; returns the number of ratings. */
export async function writeSyntheticLongCsv(path: string, d: SyntheticDesign, mutate?: (line: string, row: number) => string): Promise<number> {
  const out = createWriteStream(path);
  let buffer: string[] = [];
  let row = 0;
  for (const line of syntheticLongLines(d)) {
    row += 1;
    buffer.push(mutate ? mutate(line, row) : line);
    if (buffer.length >= 5000) {
      if (!out.write(buffer.join('\n') + '\n')) await once(out, 'drain');
      buffer = [];
    }
  }
  if (buffer.length > 0) out.write(buffer.join('\n') + '\n');
  out.end();
  await once(out, 'finish');
  return nRatingsOf(d);
}

/**
 * The same design in wide form (one column per attribute, same values as the long lines).
 * `holes` leaves chosen cells empty (missing ratings) — the long form then lacks those lines.
 */
export function* syntheticWideLines(d: SyntheticDesign): Generator<string> {
  const long = syntheticLongLines(d);
  long.next(); // header
  const attributes = Array.from({ length: d.attributes }, (_, t) => attributeName(t));
  yield ['session', 'date', 'assessor', 'product', 'replicate', 'code', ...attributes].join(',');
  for (;;) {
    const values: string[] = [];
    let keys: string[] = [];
    for (let t = 0; t < d.attributes; t++) {
      const next = long.next();
      if (next.done) return;
      const cells = next.value.split(',');
      keys = [cells[0], cells[1], cells[2], cells[3], cells[4], cells[7]];
      values.push(cells[6]);
    }
    yield [...keys, ...values].join(',');
  }
}
