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
import { LevelCoder } from '../domain/level-coder.js';
import { readIntoSink, type InputSource, type ReadEvent, type ReadRatingsOptions, type ReadSink } from './read-ratings.js';

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

/**
 * Builds compact batches from a reader's events (a ReadSink: ratings arrive as fields, with no
 * object per rating); one builder per file (ids continue across batches). The typed arrays
 * grow as needed and are reused; take() hands over exact-size copies.
 */
export class CompactBuilder implements ReadSink {
  // Ids are 1-based: 0 stands for "no code".
  private readonly tables = NAME_KINDS.map(() => new LevelCoder<string>(''));
  private keys = new Int32Array(1024 * KEY_FIELDS);
  private values = new Float64Array(1024);
  private nRatings = 0;
  private others: CompactBatch['others'] = [];
  private nMissing = 0;
  private maxRow = 0;

  get length(): number {
    return this.nRatings + this.others.length + this.nMissing;
  }

  rating(row: number, column: string, session: string, assessor: string, product: string, replicate: number, attribute: string, value: number, date: string, code: string | null): void {
    const r = this.nRatings;
    if (r === this.values.length) {
      const keys = new Int32Array(this.keys.length * 2);
      keys.set(this.keys);
      this.keys = keys;
      const values = new Float64Array(this.values.length * 2);
      values.set(this.values);
      this.values = values;
    }
    const tables = this.tables;
    const keysOut = this.keys;
    const at = r * KEY_FIELDS;
    keysOut[at + F_SESSION] = tables[KIND_SESSION].code(session);
    keysOut[at + F_ATTRIBUTE] = tables[KIND_ATTRIBUTE].code(attribute);
    keysOut[at + F_ASSESSOR] = tables[KIND_ASSESSOR].code(assessor);
    keysOut[at + F_PRODUCT] = tables[KIND_PRODUCT].code(product);
    keysOut[at + F_REPLICATE] = replicate;
    keysOut[at + F_ROW] = row;
    keysOut[at + F_COLUMN] = tables[KIND_COLUMN].code(column);
    keysOut[at + F_CODE] = code === null || code === undefined ? 0 : tables[KIND_CODE].code(code);
    keysOut[at + F_DATE] = tables[KIND_DATE].code(date);
    this.values[r] = value;
    if (row > this.maxRow) this.maxRow = row;
    this.nRatings = r + 1;
  }

  push(event: ReadEvent): void {
    switch (event.type) {
      case 'rating': {
        const { rating } = event;
        this.rating(event.row, event.column, rating.session, rating.assessor, rating.product, rating.replicate, rating.attribute, rating.value, rating.date, rating.code ?? null);
        break;
      }
      case 'missing':
        this.nMissing++;
        if (event.row > this.maxRow) this.maxRow = event.row;
        break;
      case 'problem':
        if (event.problem.row !== null && event.problem.row > this.maxRow) this.maxRow = event.problem.row;
        this.others.push({ at: this.nRatings, event });
        break;
      case 'finding':
        this.others.push({ at: this.nRatings, event });
        break;
    }
  }

  /** The batch of everything since the last take(). */
  take(): CompactBatch {
    const n = this.nRatings;
    const batch: CompactBatch = {
      nRatings: n,
      keys: this.keys.slice(0, n * KEY_FIELDS),
      values: this.values.slice(0, n),
      newNames: this.tables.map((t) => t.takeFresh()),
      others: this.others,
      nMissing: this.nMissing,
      maxRow: this.maxRow,
    };
    this.nRatings = 0;
    this.others = [];
    this.nMissing = 0;
    this.maxRow = 0;
    return batch;
  }
}

/** Turns event arrays into compact batches; one encoder per file (ids continue across batches). */
export class CompactEncoder {
  private readonly builder = new CompactBuilder();

  encode(events: readonly ReadEvent[]): CompactBatch {
    for (let i = 0; i < events.length; i++) this.builder.push(events[i]);
    return this.builder.take();
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

/**
 * Read and validate a file (readRatingBatches' events and rules) straight into compact batches,
 * without an event object per rating: the import's reader, on a worker or on the calling thread.
 */
export async function* readCompactBatches(
  source: InputSource,
  options: ReadRatingsOptions,
  eventsPerBatch = EVENTS_PER_COMPACT_BATCH,
): AsyncGenerator<CompactBatch> {
  const builder = new CompactBuilder();
  // Key strings are interned by the builder's name tables, so the reader need not keep them.
  for await (const _ of readIntoSink(source, options, builder, eventsPerBatch, false)) yield builder.take();
}
