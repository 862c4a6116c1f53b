/**
 * What a flag build reads from the store, fast enough for the one-new-session refit (goal:
 * fits and flags updated in under 1 s): the panel history without ratings (assembled by
 * store/panel-history.ts, as buildPanelHistory in server/refit.ts assembles it) and every
 * rating of the panel packed in columns (as loadPackedRatings gives them), identical to those
 * two, in a fraction of their time:
 * - stored fit and index JSON is parsed once per distinct text: each call reads the texts
 *   (cheap) and parses only those that differ from the text parsed last time for that cell;
 * - ratings are read per session and kept between calls while the session is unchanged. A
 *   session's ratings change only together with its data version (the import and the quarantine
 *   release bump it; the refit's "fits kept, not recomputed" rests on the same rule); the count
 *   and the first and last rating id are checked as well, so a session read again is one whose
 *   rows really changed.
 * The parsed objects are shared between calls: callers must not modify the history they get
 * (the flag engine does not; test/analysis/flags/frozen-history.test.ts checks it on a frozen
 * history). Memory: one copy of each panel's parsed results and packed ratings per connection.
 */
import type { Database, Statement } from 'better-sqlite3';
import type { FitJson } from '../domain/analysis.js';
import type { AssessorSessionIndices } from '../analysis/indices/types.js';
import type { PanelHistory } from '../analysis/monitor/series.js';
import { allocatePackedRatings, type PackedRatings } from './fits-sessions.js';
import { assemblePanelHistory } from './panel-history.js';

export interface FlagInputs {
  /** As buildPanelHistory(db, panelId, { windowSessions }) (ratings undefined). */
  history: PanelHistory;
  /** As loadPackedRatings(db, panelId). */
  ratings: PackedRatings;
}

interface ParsedText<T> {
  text: string;
  value: T;
}

interface SessionRatingColumns {
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

interface PanelCache {
  fits: Map<string, ParsedText<FitJson>>;
  indices: Map<string, ParsedText<AssessorSessionIndices[]>>;
  ratings: Map<number, SessionRatingColumns>;
}

const CACHES = new WeakMap<Database, Map<number, PanelCache>>();
const STATEMENTS = new WeakMap<Database, Map<string, Statement>>();

/** Prepared once per connection (preparing the statements took about a fifth of a warm call). */
function statement(db: Database, sql: string): Statement {
  let byText = STATEMENTS.get(db);
  if (!byText) STATEMENTS.set(db, (byText = new Map()));
  let prepared = byText.get(sql);
  if (!prepared) byText.set(sql, (prepared = db.prepare(sql)));
  return prepared;
}

function panelCache(db: Database, panelId: number): PanelCache {
  let byPanel = CACHES.get(db);
  if (!byPanel) CACHES.set(db, (byPanel = new Map()));
  let cache = byPanel.get(panelId);
  if (!cache) byPanel.set(panelId, (cache = { fits: new Map(), indices: new Map(), ratings: new Map() }));
  return cache;
}

/** Parse each text once; the new map keeps only the cells seen now (deleted cells leave the cache). */
function parsedTexts<T>(previous: Map<string, ParsedText<T>>, rows: readonly [key: string, text: string][]): { values: T[]; next: Map<string, ParsedText<T>> } {
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

export function loadFlagInputs(db: Database, panelId: number, options: { windowSessions: number }): FlagInputs {
  const cache = panelCache(db, panelId);

  // Same rows and order as loadSessionFits / loadSessionIndices (store/fits-results.ts).
  const fitRows = statement(
    db,
    `SELECT s.label, s.session_date, at.name, f.session_id || ':' || f.attribute_id, f.fit_json
         FROM session_fit f JOIN session s ON s.id = f.session_id JOIN attribute at ON at.id = f.attribute_id
        WHERE s.panel_id = ? ORDER BY s.session_date, s.label, at.name`,
  )
    .raw()
    .all(panelId) as [session: string, date: string, attribute: string, key: string, json: string][];
  const indexRows = statement(
    db,
    `SELECT i.session_id || ':' || i.attribute_id, i.indices_json FROM session_indices i JOIN session s ON s.id = i.session_id
         JOIN attribute at ON at.id = i.attribute_id
        WHERE s.panel_id = ? ORDER BY s.session_date, s.label, at.name`,
  )
    .raw()
    .all(panelId) as [key: string, json: string][];
  const fits = parsedTexts(cache.fits, fitRows.map((r) => [r[3], r[4]]));
  const indices = parsedTexts(cache.indices, indexRows);
  cache.fits = fits.next;
  cache.indices = indices.next;

  const history = assemblePanelHistory(db, panelId, {
    fits: fitRows.map(([session, date, attribute], i) => ({ session, date, attribute, fit: fits.values[i] })),
    indices: indices.values.flat(),
    windowSessions: options.windowSessions,
  });
  return { history, ratings: packedRatings(db, panelId, cache) };
}

/** Every rating of the panel in columns, as loadPackedRatings (store/fits-sessions.ts) gives them. */
function packedRatings(db: Database, panelId: number, cache: PanelCache): PackedRatings {
  const table = (sql: string) => {
    const rows = statement(db, sql).raw().all(panelId) as [number, string][];
    let maxId = 0;
    for (const [id] of rows) maxId = Math.max(maxId, id);
    const indexOf = new Int32Array(maxId + 1).fill(-1);
    rows.forEach(([id], i) => (indexOf[id] = i));
    return { indexOf, names: rows.map(([, name]) => name) };
  };
  const sessionRows = statement(db, 'SELECT id, label, session_date FROM session WHERE panel_id = ? ORDER BY session_date, label')
    .raw()
    .all(panelId) as [number, string, string][];
  const assessors = table('SELECT id, code FROM assessor WHERE panel_id = ? ORDER BY code');
  const products = table('SELECT id, code FROM product WHERE panel_id = ? ORDER BY code');
  const attributes = table('SELECT id, name FROM attribute WHERE panel_id = ? ORDER BY name');

  // Refresh the sessions whose version, count or id range changed; forget sessions that are gone.
  // Correlated subqueries on the covering (session_id, …) index: about half the time of a join + GROUP BY.
  const states = statement(
    db,
    `SELECT s.id, s.data_version, (SELECT count(*) FROM rating r WHERE r.session_id = s.id),
            (SELECT min(r.id) FROM rating r WHERE r.session_id = s.id), (SELECT max(r.id) FROM rating r WHERE r.session_id = s.id)
       FROM session s WHERE s.panel_id = ?`,
  )
    .raw()
    .all(panelId) as [id: number, dataVersion: number, count: number, minId: number | null, maxId: number | null][];
  const readSession = statement(db, 'SELECT id, assessor_id, product_id, attribute_id, replicate, value, sample_code FROM rating WHERE session_id = ? ORDER BY id').raw();
  const current = new Map<number, SessionRatingColumns>();
  for (const [sessionId, dataVersion, count, minId, maxId] of states) {
    let columns = cache.ratings.get(sessionId);
    if (!columns || columns.dataVersion !== dataVersion || columns.count !== count || columns.minId !== (minId ?? 0) || columns.maxId !== (maxId ?? 0)) {
      columns = readSessionColumns(readSession.all(sessionId) as RatingRow[], dataVersion);
    }
    current.set(sessionId, columns);
  }
  cache.ratings = current;

  // Global rating-id order (loadPackedRatings orders by r.id): sessions by their first id, and
  // when two sessions' id ranges interleave (one file with several sessions), a full sort.
  const parts = sessionRows.map(([id], sessionIndex) => ({ sessionIndex, columns: current.get(id)! })).filter((p) => p.columns && p.columns.count > 0);
  parts.sort((a, b) => a.columns.minId - b.columns.minId);
  const n = parts.reduce((s, p) => s + p.columns.count, 0);
  const partOf = new Int32Array(n);
  const rowOf = new Int32Array(n);
  let at = 0;
  for (let p = 0; p < parts.length; p++) {
    for (let row = 0; row < parts[p].columns.count; row++, at++) {
      partOf[at] = p;
      rowOf[at] = row;
    }
  }
  const disjoint = parts.every((p, i) => i === 0 || parts[i - 1].columns.maxId < p.columns.minId);
  const order = new Int32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  if (!disjoint) {
    const idAt = (i: number) => parts[partOf[i]].columns.ids[rowOf[i]];
    order.set(Array.from(order).sort((a, b) => idAt(a) - idAt(b)));
  }

  const { packed, setCode } = allocatePackedRatings(
    { sessions: sessionRows.map(([, label, date]) => ({ label, date })), assessors: assessors.names, products: products.names, attributes: attributes.names },
    n,
  );
  for (let i = 0; i < n; i++) {
    const k = order[i];
    const part = parts[partOf[k]];
    const columns = part.columns;
    const row = rowOf[k];
    packed.sessionIndex[i] = part.sessionIndex;
    packed.assessorIndex[i] = assessors.indexOf[columns.assessorId[row]];
    packed.productIndex[i] = products.indexOf[columns.productId[row]];
    packed.attributeIndex[i] = attributes.indexOf[columns.attributeId[row]];
    packed.replicate[i] = columns.replicate[row];
    packed.value[i] = columns.value[row];
    setCode(i, columns.code[row]);
  }
  return packed;
}

type RatingRow = [id: number, assessorId: number, productId: number, attributeId: number, replicate: number, value: number, code: string | null];

function readSessionColumns(rows: RatingRow[], dataVersion: number): SessionRatingColumns {
  const count = rows.length;
  const columns: SessionRatingColumns = {
    dataVersion,
    count,
    minId: count > 0 ? rows[0][0] : 0,
    maxId: count > 0 ? rows[count - 1][0] : 0,
    ids: new Float64Array(count),
    assessorId: new Int32Array(count),
    productId: new Int32Array(count),
    attributeId: new Int32Array(count),
    replicate: new Int32Array(count),
    value: new Float64Array(count),
    code: new Array(count),
  };
  for (let i = 0; i < count; i++) {
    const [id, assessorId, productId, attributeId, replicate, value, code] = rows[i];
    columns.ids[i] = id;
    columns.assessorId[i] = assessorId;
    columns.productId[i] = productId;
    columns.attributeId[i] = attributeId;
    columns.replicate[i] = replicate;
    columns.value[i] = value;
    columns.code[i] = code;
  }
  return columns;
}
