/**
 * The panel history the flag engine and the monitor pages read, assembled from stored fits and
 * indices. One assembler for both readers: buildPanelHistory (server/refit.ts) parses the
 * stored JSON afresh, loadFlagInputs (store/read-flag-inputs.ts) reuses what it parsed last
 * time; everything else they read the same way, here.
 */
import type { Database } from 'better-sqlite3';
import type { FitJson } from '../domain/analysis.js';
import type { Rating } from '../domain/ratings.js';
import type { AssessorSessionIndices } from '../analysis/indices/types.js';
import type { ImportFinding, PanelHistory, PeriodFitSummary, SessionAttributeResult } from '../analysis/monitor/series.js';
import { loadPeriodFits, loadSessionFits, loadSessionIndices } from './fits-results.js';
import { listAttributes, listProducts, listSessionVersions, loadCurrentFindings, loadPackedRatings, unpackRatings } from './fits-sessions.js';
import { listPanelEvents } from './monitor-events.js';

/** One stored session × attribute fit, in the store's order (session date, label, attribute). */
export interface StoredFitOfHistory {
  session: string;
  date: string;
  attribute: string;
  fit: FitJson;
}

/** The part of a stored period result the history needs; a result with `problem` has no fit. */
type StoredPeriodSummary = { json: { variance: Record<string, number> }; lrt: PeriodFitSummary['lrt'] } | { problem: string };

export function assemblePanelHistory(
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
    const result = p.result as StoredPeriodSummary;
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


/**
 * Everything the flag engine and the monitor pages read, from the store (structured-clone safe).
 * The ratings are left out unless asked for: the refit sends them packed (loadPackedRatings).
 */
export function buildPanelHistory(
  db: Database,
  panelId: number,
  options: { windowSessions?: number; withRatings?: boolean } = {},
): PanelHistory {
  return assemblePanelHistory(db, panelId, {
    fits: loadSessionFits(db, panelId).map((f) => ({ session: f.session, date: f.sessionDate, attribute: f.attribute, fit: f.fit })),
    indices: loadSessionIndices(db, panelId),
    windowSessions: options.windowSessions ?? DEFAULT_WINDOW_SESSIONS,
    ratings: options.withRatings ? unpackRatings(loadPackedRatings(db, panelId)) : undefined,
  });
}
