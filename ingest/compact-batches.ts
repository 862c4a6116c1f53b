/**
 * Read events in a compact form for the import loop: the ratings of a batch as typed arrays
 * (names interned to small integers, values as doubles) instead of one object per rating.
 * A worker thread can hand such a batch to the main thread by transferring two buffers, and the
 * store stages the integers without looking names up again. Pure: no I/O, no clock.
 *
 * Name ids are 1-based and dense per kind; 0 means "none" (a rating without a sample code).
 * A batch lists the names it uses for the first time (`newNames`), in id order, so a decoder
 * that applies batches in order knows every name an id stands for.
 */
import type { ReadEvent } from './read-ratings.js';

/** Kinds of interned names, in the order of CompactBatch.newNames. */
export const NAME_KINDS = ['session', 'attribute', 'assessor', 'product', 'column', 'code', 'date'] as const;
export type NameKind = (typeof NAME_KINDS)[number];
export const KIND_SESSION = 0;
export const KIND_ATTRIBUTE = 1;
export const KIND_ASSESSOR = 2;
export const KIND_PRODUCT = 3;
export const KIND_COLUMN = 4;
export const KIND_CODE = 5;
export const KIND_DATE = 6;

/** Integers per rating in CompactBatch.keys, and each one's offset. */
export const KEY_FIELDS = 9;
export const F_SESSION = 0;
export const F_ATTRIBUTE = 1;
export const F_ASSESSOR = 2;
export const F_PRODUCT = 3;
/** Replicate number itself (the reader accepts at most 9 digits, so it fits an Int32). */
export const F_REPLICATE = 4;
/** Row as a spreadsheet shows it. */
export const F_ROW = 5;
export const F_COLUMN = 6;
/** 0 when the rating has no sample code. */
export const F_CODE = 7;
export const F_DATE = 8;

export interface CompactBatch {
  nRatings: number;
  /** nRatings × KEY_FIELDS integers (see the F_ offsets). */
  keys: Int32Array;
  /** One value per rating. */
  values: Float64Array;
  /** Per kind (NAME_KINDS order): names first used in this batch, in id order. */
  newNames: string[][];
  /** Problems and findings, in reading order; `at` = how many of this batch's ratings came before. */
  others: { at: number; event: Exclude<ReadEvent, { type: 'rating' } | { type: 'missing' }> }[];
  /** Empty cells read as missing ratings (wide form); only their number is kept. */
  nMissing: number;
  /** Largest spreadsheet row of any event in the batch; 0 when none names a row. */
  maxRow: number;
}

/** Interns names to dense 1-based ids, remembering the ones not yet handed on. */
class NameIds {
  private readonly ids = new Map<string, number>();
  private readonly names: string[] = [''];
  /** The id that followed each id last time: files repeat their order (attributes, codes, assessors). */
  private readonly follower: number[] = [0];
  private fresh: string[] = [];
  private lastName = '';
  private lastId = 0;

  id(name: string): number {
    // Consecutive ratings mostly repeat a name, or give the one that followed it last time:
    // a comparison or two instead of hashing the name.
    if (name === this.lastName && this.lastId !== 0) return this.lastId;
    const guess = this.follower[this.lastId];
    let id: number | undefined = guess !== 0 && this.names[guess] === name ? guess : this.ids.get(name);
    if (id === undefined) {
      id = this.names.length;
      this.ids.set(name, id);
      this.names.push(name);
      this.follower.push(0);
      this.fresh.push(name);
    }
    this.follower[this.lastId] = id;
    this.lastName = name;
    this.lastId = id;
    return id;
  }

  takeFresh(): string[] {
    const fresh = this.fresh;
    this.fresh = [];
    return fresh;
  }
}

/** Turns event arrays into compact batches; one encoder per file (ids continue across batches). */
export class CompactEncoder {
  private readonly tables = NAME_KINDS.map(() => new NameIds());

  encode(events: readonly ReadEvent[]): CompactBatch {
    let nRatings = 0;
    for (let i = 0; i < events.length; i++) if (events[i].type === 'rating') nRatings++;
    const keys = new Int32Array(nRatings * KEY_FIELDS);
    const values = new Float64Array(nRatings);
    const others: CompactBatch['others'] = [];
    const [sessions, attributes, assessors, products, columns, codes, dates] = this.tables;
    let nMissing = 0;
    let maxRow = 0;
    let r = 0;
    for (let i = 0; i < events.length; i++) {
      const event = events[i];
      switch (event.type) {
        case 'rating': {
          const { rating, row } = event;
          const at = r * KEY_FIELDS;
          keys[at + F_SESSION] = sessions.id(rating.session);
          keys[at + F_ATTRIBUTE] = attributes.id(rating.attribute);
          keys[at + F_ASSESSOR] = assessors.id(rating.assessor);
          keys[at + F_PRODUCT] = products.id(rating.product);
          keys[at + F_REPLICATE] = rating.replicate;
          keys[at + F_ROW] = row;
          keys[at + F_COLUMN] = columns.id(event.column);
          keys[at + F_CODE] = rating.code === null || rating.code === undefined ? 0 : codes.id(rating.code);
          keys[at + F_DATE] = dates.id(rating.date);
          values[r] = rating.value;
          if (row > maxRow) maxRow = row;
          r++;
          break;
        }
        case 'missing':
          nMissing++;
          if (event.row > maxRow) maxRow = event.row;
          break;
        case 'problem':
          if (event.problem.row !== null && event.problem.row > maxRow) maxRow = event.problem.row;
          others.push({ at: r, event });
          break;
        case 'finding':
          others.push({ at: r, event });
          break;
      }
    }
    return { nRatings, keys, values, newNames: this.tables.map((t) => t.takeFresh()), others, nMissing, maxRow };
  }
}

/**
 * Events per compact batch, at least (the last may be smaller): the store stages one batch per
 * transaction, so larger batches mean fewer commits; the reader hands over about 1,000 at a time.
 */
export const EVENTS_PER_COMPACT_BATCH = 8192;

/** Compact batches of an event stream, encoded on the calling thread (tests, small files). */
export async function* compactBatches(
  events: AsyncIterable<ReadEvent | ReadEvent[]> | Iterable<ReadEvent | ReadEvent[]>,
  eventsPerBatch = EVENTS_PER_COMPACT_BATCH,
): AsyncGenerator<CompactBatch> {
  const encoder = new CompactEncoder();
  let pending: ReadEvent[] = [];
  for await (const item of events) {
    if (Array.isArray(item)) {
      for (let i = 0; i < item.length; i++) pending.push(item[i]);
    } else {
      pending.push(item);
    }
    if (pending.length >= eventsPerBatch) {
      yield encoder.encode(pending);
      pending = [];
    }
  }
  if (pending.length > 0) yield encoder.encode(pending);
}
