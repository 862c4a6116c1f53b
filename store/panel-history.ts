/**
 * The panel history the flag engine and the monitor pages read, from stored fits and indices:
 * one loader for the refit's flag build, the flags command (through the refit) and the pages.
 * With a memo (store/read-memo.ts) it reuses what it parsed last time and reads only the
 * sessions whose ratings changed (the refit's one-new-session path); without, it reads
 * everything afresh, by the same code.
 */
import type { Database } from 'better-sqlite3';
import type { FitJson } from '../domain/analysis.js';
import type { Rating } from '../domain/ratings.js';
import type { AssessorSessionIndices } from '../analysis/indices/types.js';
import type { ImportFinding, PanelHistory, PeriodFitSummary, SessionAttributeResult } from '../analysis/monitor/series.js';
import { loadPeriodFits } from './fits-results.js';
import { listAttributes, listProducts, listSessionVersions, loadCurrentFindings, unpackRatings } from './fits-sessions.js';
import { listPanelEvents } from './monitor-events.js';
import { loadPackedRatings } from './read-packed-ratings.js';
import { createHistoryReadMemo, panelReads, parsedTexts, statement, type HistoryReadMemo } from './read-memo.js';

export { createHistoryReadMemo, type HistoryReadMemo } from './read-memo.js';
export { loadPackedRatings } from './read-packed-ratings.js';

/** One stored session × attribute fit, in the store's order (session date, label, attribute). */
export interface StoredFitOfHistory {
  session: string;
  date: string;
  attribute: string;
  fit: FitJson;
}

function assemblePanelHistory(
  db: Database,
  panelId: number,
  parts: {
    fits: readonly StoredFitOfHistory[];
    /** Indices rows in any order; each row is placed by the session and attribute it names. */
    indices: readonly AssessorSessionIndices[];
    /** Period fits of this window length are summarised; other lengths are left out. */
    windowSessions: number;
    ratings?: Rating[];
  },
): PanelHistory {
  const sessions = listSessionVersions(db, panelId);
  const attributes = listAttributes(db, panelId);
  const scaleOf = new Map(attributes.map((a) => [a.name, a.scale]));
  const indicesBy = new Map<string, AssessorSessionIndices[]>();
  for (const row of parts.indices) {
    const key = `${row.session}\u0000${row.attribute}`;
    let group = indicesBy.get(key);
    if (!group) indicesBy.set(key, (group = []));
    group.push(row);
  }
  const results: SessionAttributeResult[] = parts.fits.map(({ session, date, attribute, fit }) => {
    const scale = scaleOf.get(attribute)!;
    return {
      session,
      date,
      attribute,
      scaleMin: scale.min,
      scaleMax: scale.max,
      fit,
      indices: indicesBy.get(`${session}\u0000${attribute}`) ?? [],
      productTestP: fit.productTest?.p ?? null,
    };
  });
  const periodFits: PeriodFitSummary[] = [];
  for (const p of loadPeriodFits(db, panelId)) {
    if (p.windowSessions !== parts.windowSessions) continue;
    const result = p.result;
    if ('problem' in result) continue;
    periodFits.push({
      attribute: p.attribute,
      sessions: p.sessions.map(([label]: [string, number]) => label),
      productSessionVariance: result.json.variance['product:session'] ?? 0,
      lrt: result.lrt,
    });
  }
  return {
    sessions: sessions.map((s) => ({ label: s.label, date: s.date })),
    attributes: attributes.map((a) => ({ name: a.name, scaleMin: a.scale.min, scaleMax: a.scale.max })),
    referenceProducts: listProducts(db, panelId)
      .filter((p) => p.role === 'reference')
      .map((p) => p.code),
    results,
    ratings: parts.ratings,
    importFindings: loadCurrentFindings(db, panelId) as ImportFinding[],
    events: listPanelEvents(db, panelId),
    periodFits,
  };
}

// The signature lives apart so that `flags` on an up-to-date store can compare it without loading this module.
export { ANALYSIS_VERSION, panelDataSignature } from './data-signature.js';

/** Default rolling window of the period model: the last 12 sessions. */
export const DEFAULT_WINDOW_SESSIONS = 12;


export interface PanelHistoryOptions {
  /** Period fits of this window length are summarised (default DEFAULT_WINDOW_SESSIONS). */
  windowSessions?: number;
  /** With the ratings as Rating objects (the control-product page); the refit sends them packed instead (loadPackedRatings). */
  withRatings?: boolean;
  /** Reuse what this memo read before (incremental reads); the caller keeps it between calls. */
  memo?: HistoryReadMemo;
}

/** Everything the flag engine and the monitor pages read, from the store (structured-clone safe). */
export function loadPanelHistory(db: Database, panelId: number, options: PanelHistoryOptions = {}): PanelHistory {
  const memo = options.memo ?? createHistoryReadMemo();
  const reads = panelReads(memo, db, panelId);
  // Session order, then attribute name (the order of the pages' and the flags' series).
  const fitRows = statement(
    memo,
    `SELECT s.label, s.session_date, at.name, f.session_id || ':' || f.attribute_id, f.fit_json
         FROM session_fit f JOIN session s ON s.id = f.session_id JOIN attribute at ON at.id = f.attribute_id
        WHERE s.panel_id = ? ORDER BY s.session_date, s.label, at.name`,
  )
    .raw()
    .all(panelId) as [session: string, date: string, attribute: string, key: string, json: string][];
  const indexRows = statement(
    memo,
    `SELECT i.session_id || ':' || i.attribute_id, i.indices_json FROM session_indices i JOIN session s ON s.id = i.session_id
         JOIN attribute at ON at.id = i.attribute_id
        WHERE s.panel_id = ? ORDER BY s.session_date, s.label, at.name`,
  )
    .raw()
    .all(panelId) as [key: string, json: string][];
  const fits = parsedTexts(reads.fits, fitRows.map((r) => [r[3], r[4]]));
  const indices = parsedTexts(reads.indices, indexRows);
  reads.fits = fits.next;
  reads.indices = indices.next;
  return assemblePanelHistory(db, panelId, {
    fits: fitRows.map(([session, date, attribute], i) => ({ session, date, attribute, fit: fits.values[i] })),
    indices: indices.values.flat(),
    windowSessions: options.windowSessions ?? DEFAULT_WINDOW_SESSIONS,
    ratings: options.withRatings ? unpackRatings(loadPackedRatings(db, panelId, memo)) : undefined,
  });
}
