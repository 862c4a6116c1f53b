/**
 * A file read straight into columns (the analyze command's form): the reader's checks and events
 * as readRatingBatches gives them, but each rating written into typed arrays, its names coded to
 * ids in first-seen order, so no object is made per rating and nothing is copied twice.
 * Problems and findings are kept in reading order; empty wide-form cells are only counted.
 */
import { stat } from 'node:fs/promises';
import { LevelCoder } from '../domain/level-coder.js';
import type { InputFinding, InputProblem } from '../domain/problems.js';
import type { RatingColumns } from '../domain/ratings.js';
import { readIntoSink, type InputSource, type ReadEvent, type ReadRatingsOptions, type ReadSink } from './read-ratings.js';

export interface ReadColumns {
  columns: RatingColumns;
  /** Each rating's sample-code id into `codeNames`; 0: no code. */
  code: Int32Array;
  codeNames: readonly string[];
  problems: InputProblem[];
  findings: InputFinding[];
}

/** Ratings between hand-overs of the reader (it yields to the event loop between them). */
const RATINGS_PER_STEP = 8192;

class ColumnSink implements ReadSink {
  private readonly sessions = new LevelCoder<string>();
  private readonly attributes = new LevelCoder<string>();
  private readonly assessors = new LevelCoder<string>();
  private readonly products = new LevelCoder<string>();
  // Code 0 is "no sample code".
  private readonly codes = new LevelCoder<string>('');
  n = 0;
  held = 0;
  session: Int32Array<ArrayBuffer>;
  attribute: Int32Array<ArrayBuffer>;
  assessor: Int32Array<ArrayBuffer>;
  product: Int32Array<ArrayBuffer>;
  replicate: Int32Array<ArrayBuffer>;
  code: Int32Array<ArrayBuffer>;
  value: Float64Array<ArrayBuffer>;
  readonly problems: InputProblem[] = [];
  readonly findings: InputFinding[] = [];

  /** `capacity`: ratings expected (a guess; the columns grow past it). */
  constructor(capacity: number) {
    this.session = new Int32Array(capacity);
    this.attribute = new Int32Array(capacity);
    this.assessor = new Int32Array(capacity);
    this.product = new Int32Array(capacity);
    this.replicate = new Int32Array(capacity);
    this.code = new Int32Array(capacity);
    this.value = new Float64Array(capacity);
  }

  get length(): number {
    return this.held;
  }

  push(event: Exclude<ReadEvent, { type: 'rating' }>): void {
    this.held++;
    if (event.type === 'problem') this.problems.push(event.problem);
    else if (event.type === 'finding') this.findings.push(event.finding);
  }

  rating(_row: number, _column: string, session: string, assessor: string, product: string, replicate: number, attribute: string, value: number, _date: string, code: string | null): void {
    const i = this.n;
    if (i === this.value.length) this.grow();
    this.session[i] = this.sessions.code(session);
    this.attribute[i] = this.attributes.code(attribute);
    this.assessor[i] = this.assessors.code(assessor);
    this.product[i] = this.products.code(product);
    this.replicate[i] = replicate;
    this.code[i] = code === null ? 0 : this.codes.code(code);
    this.value[i] = value;
    this.n = i + 1;
    this.held++;
  }

  private grow(): void {
    const size = 2 * this.value.length;
    const widen = (column: Int32Array<ArrayBuffer>): Int32Array<ArrayBuffer> => {
      const wider = new Int32Array(size);
      wider.set(column);
      return wider;
    };
    this.session = widen(this.session);
    this.attribute = widen(this.attribute);
    this.assessor = widen(this.assessor);
    this.product = widen(this.product);
    this.replicate = widen(this.replicate);
    this.code = widen(this.code);
    const value = new Float64Array(size);
    value.set(this.value);
    this.value = value;
  }

  result(): ReadColumns {
    const n = this.n;
    return {
      columns: {
        n,
        session: this.session.subarray(0, n),
        attribute: this.attribute.subarray(0, n),
        assessor: this.assessor.subarray(0, n),
        product: this.product.subarray(0, n),
        replicate: this.replicate.subarray(0, n),
        value: this.value.subarray(0, n),
        sessionNames: this.sessions.names,
        attributeNames: this.attributes.names,
        assessorNames: this.assessors.names,
        productNames: this.products.names,
      },
      code: this.code.subarray(0, n),
      codeNames: this.codes.names,
      problems: this.problems,
      findings: this.findings,
    };
  }
}

/** Reads and checks a ratings file (CSV or .xlsx) into columns; never throws for bad input. */
export async function readRatingColumns(source: InputSource, options: ReadRatingsOptions): Promise<ReadColumns> {
  const sink = new ColumnSink(await capacityGuess(source));
  // Key strings are coded by the sink, so the reader need not keep one object per text.
  for await (const _ of readIntoSink(source, options, sink, RATINGS_PER_STEP, false)) sink.held = 0;
  return sink.result();
}

/** Bytes per rating below which a CSV row cannot go (keys, date, value and delimiters). */
const MIN_BYTES_PER_RATING = 16;
/** Largest first allocation (ratings); bigger files grow the columns by doubling. */
const MAX_FIRST_CAPACITY = 1 << 22;

/**
 * Room for every rating a CSV of this size can hold, so the columns are allocated once: untouched
 * pages of a large typed array cost nothing, while growing copies into fresh memory, the expensive
 * part here (bench/README.md, 2026-12-05). An .xlsx may hold more; its columns grow.
 */
async function capacityGuess(source: InputSource): Promise<number> {
  let bytes: number;
  try {
    bytes = 'bytes' in source ? source.bytes.length : (await stat(source.path)).size;
  } catch {
    return RATINGS_PER_STEP; // the reader reports the unreadable file
  }
  return Math.min(MAX_FIRST_CAPACITY, Math.max(RATINGS_PER_STEP, Math.ceil(bytes / MIN_BYTES_PER_RATING)));
}
