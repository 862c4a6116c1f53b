/**
 * Every rating of a panel packed in columns (what the refit sends to the flags worker, and what
 * a page with ratings unpacks), read per session. With a memo kept by the caller (the refit
 * service keeps one), a session is read again only when it changed: a session's ratings change
 * only together with its data version (the import and the quarantine release bump it; the
 * refit's "fits kept, not recomputed" rests on the same rule); the count and the first and last
 * rating id are checked as well, so a session read again is one whose rows really changed.
 * Without a memo everything is read afresh, by the same code.
 */
import type { Database } from 'better-sqlite3';
import { allocatePackedRatings, type PackedRatings } from './fits-sessions.js';
import { createHistoryReadMemo, panelReads, statement, type HistoryReadMemo, type SessionRatingColumns } from './read-memo.js';

/**
 * Every rating of the panel in columns: sessions, assessors, products and attributes as the
 * store lists them (by date and label, by code, by name), ratings in rating-id order.
 */
export function loadPackedRatings(db: Database, panelId: number, memo: HistoryReadMemo = createHistoryReadMemo()): PackedRatings {
  const cache = panelReads(memo, db, panelId);
  const table = (sql: string) => {
    const rows = statement(memo, sql).raw().all(panelId) as [number, string][];
    let maxId = 0;
    for (const [id] of rows) maxId = Math.max(maxId, id);
    const indexOf = new Int32Array(maxId + 1).fill(-1);
    rows.forEach(([id], i) => (indexOf[id] = i));
    return { indexOf, names: rows.map(([, name]) => name) };
  };
  const sessionRows = statement(memo, 'SELECT id, label, session_date FROM session WHERE panel_id = ? ORDER BY session_date, label')
    .raw()
    .all(panelId) as [number, string, string][];
  const assessors = table('SELECT id, code FROM assessor WHERE panel_id = ? ORDER BY code');
  const products = table('SELECT id, code FROM product WHERE panel_id = ? ORDER BY code');
  const attributes = table('SELECT id, name FROM attribute WHERE panel_id = ? ORDER BY name');

  // Refresh the sessions whose version, count or id range changed; forget sessions that are gone.
  // Correlated subqueries on the covering (session_id, …) index: about half the time of a join + GROUP BY.
  const states = statement(
    memo,
    `SELECT s.id, s.data_version, (SELECT count(*) FROM rating r WHERE r.session_id = s.id),
            (SELECT min(r.id) FROM rating r WHERE r.session_id = s.id), (SELECT max(r.id) FROM rating r WHERE r.session_id = s.id)
       FROM session s WHERE s.panel_id = ?`,
  )
    .raw()
    .all(panelId) as [id: number, dataVersion: number, count: number, minId: number | null, maxId: number | null][];
  const readSession = statement(memo, 'SELECT id, assessor_id, product_id, attribute_id, replicate, value, sample_code FROM rating WHERE session_id = ? ORDER BY id').raw();
  const current = new Map<number, SessionRatingColumns>();
  for (const [sessionId, dataVersion, count, minId, maxId] of states) {
    let columns = cache.ratings.get(sessionId);
    if (!columns || columns.dataVersion !== dataVersion || columns.count !== count || columns.minId !== (minId ?? 0) || columns.maxId !== (maxId ?? 0)) {
      columns = readSessionColumns(readSession.all(sessionId) as RatingRow[], dataVersion);
    }
    current.set(sessionId, columns);
  }
  cache.ratings = current;

  // Global rating-id order: sessions by their first id, and
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
