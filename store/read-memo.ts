/**
 * What the panel-history reader keeps between calls when its caller asks for incremental reads
 * (the refit service keeps one for its life): the stored fit and index JSON parsed last time, per
 * cell with its text, and each session's ratings in columns. An explicit object made by the
 * caller, not a module-level cache; a read without one parses and reads everything afresh.
 * The parsed objects are shared between calls: callers must not modify the history they get
 * (the flag engine does not; test/analysis/flags/frozen-history.test.ts checks it on a frozen
 * history). Memory: one copy of each panel's parsed results and ratings.
 */
import type { Database, Statement } from 'better-sqlite3';
import type { FitJson } from '../domain/analysis.js';
import type { AssessorSessionIndices } from '../analysis/indices/types.js';

export interface ParsedText<T> {
  text: string;
  value: T;
}

/** One session's ratings in columns, with what says whether they changed since. */
export interface SessionRatingColumns {
  dataVersion: number;
  count: number;
  minId: number;
  maxId: number;
  ids: Float64Array;
  assessorId: Int32Array;
  productId: Int32Array;
  attributeId: Int32Array;
  replicate: Int32Array;
  value: Float64Array;
  code: (string | null)[];
}

export interface PanelReads {
  fits: Map<string, ParsedText<FitJson>>;
  indices: Map<string, ParsedText<AssessorSessionIndices[]>>;
  ratings: Map<number, SessionRatingColumns>;
}

export interface HistoryReadMemo {
  /** The connection read from; the memo starts afresh when used with another one. */
  db: Database | null;
  /** Prepared once per connection (preparing the statements took about a fifth of a warm call). */
  statements: Map<string, Statement>;
  panels: Map<number, PanelReads>;
}

export function createHistoryReadMemo(): HistoryReadMemo {
  return { db: null, statements: new Map(), panels: new Map() };
}

/** The memo's part for one panel of this connection. */
export function panelReads(memo: HistoryReadMemo, db: Database, panelId: number): PanelReads {
  if (memo.db !== db) {
    memo.db = db;
    memo.statements.clear();
    memo.panels.clear();
  }
  let reads = memo.panels.get(panelId);
  if (!reads) memo.panels.set(panelId, (reads = { fits: new Map(), indices: new Map(), ratings: new Map() }));
  return reads;
}

/** A statement prepared once for the memo's connection (call panelReads first). */
export function statement(memo: HistoryReadMemo, sql: string): Statement {
  let prepared = memo.statements.get(sql);
  if (!prepared) memo.statements.set(sql, (prepared = memo.db!.prepare(sql)));
  return prepared;
}

/** Parse each text once; the new map keeps only the cells seen now (deleted cells leave the memo). */
export function parsedTexts<T>(previous: Map<string, ParsedText<T>>, rows: readonly [key: string, text: string][]): { values: T[]; next: Map<string, ParsedText<T>> } {
  const next = new Map<string, ParsedText<T>>();
  const values: T[] = new Array(rows.length);
  for (let i = 0; i < rows.length; i++) {
    const [key, text] = rows[i];
    let entry = previous.get(key);
    if (!entry || entry.text !== text) entry = { text, value: JSON.parse(text) as T };
    next.set(key, entry);
    values[i] = entry.value;
  }
  return { values, next };
}
