/**
 * Per assessor × attribute time series built from stored per-session results (methods notes §3.1):
 * level offset, scaling (log β), repeatability (log SD ratio), discrimination (log F), agreement
 * (atanh r); the per-assessor summary over attributes; and the reference (blind control) product
 * series. Transformations make the series closer to normal with steadier variance (CP, §3.1).
 */
import type { PanelHistory } from '../../domain/panel-history.js';
import type { AssessorSessionIndices } from '../indices/types.js';
import { standardiseSegments, type SegmentOptions, type SeriesPoint } from './chart.js';

// The panel history types are shared with store/ and report/: defined in domain/panel-history.ts.
export type { ImportFinding, PanelEvent, PanelHistory, PeriodFitSummary, SessionAttributeResult } from '../../domain/panel-history.js';

export type IndexSeriesKind = 'level' | 'scaling' | 'repeatability' | 'discrimination' | 'agreement';

export const INDEX_SERIES_KINDS: readonly IndexSeriesKind[] = ['level', 'scaling', 'repeatability', 'discrimination', 'agreement'];

/** The charted value of one index (null when undefined or not transformable). */
export function seriesValue(kind: IndexSeriesKind, indices: AssessorSessionIndices): number | null {
  switch (kind) {
    case 'level':
      return indices.offset;
    case 'scaling':
      return indices.scaling !== null && indices.scaling > 0 ? Math.log(indices.scaling) : null;
    case 'repeatability':
      return indices.repeatabilitySdRatio !== null && indices.repeatabilitySdRatio > 0 ? Math.log(indices.repeatabilitySdRatio) : null;
    case 'discrimination':
      return indices.discriminationF !== null && indices.discriminationF > 0 ? Math.log(indices.discriminationF) : null;
    case 'agreement':
      // |r| capped at 0.999 so that a perfect correlation on few products stays finite.
      return indices.agreementR !== null ? Math.atanh(Math.max(-0.999, Math.min(0.999, indices.agreementR))) : null;
  }
}

export interface AssessorSeries {
  assessor: string;
  attribute: string;
  kind: IndexSeriesKind;
  /** One point per panel session in time order (value null when the assessor/index is absent). */
  points: SeriesPoint[];
}

/** Indices by assessor → attribute → session, in one pass. */
export function indexLookup(history: PanelHistory): Map<string, Map<string, Map<string, AssessorSessionIndices>>> {
  const byAssessor = new Map<string, Map<string, Map<string, AssessorSessionIndices>>>();
  for (const result of history.results) {
    for (const row of result.indices) {
      let byAttribute = byAssessor.get(row.assessor);
      if (!byAttribute) byAssessor.set(row.assessor, (byAttribute = new Map()));
      let bySession = byAttribute.get(result.attribute);
      if (!bySession) byAttribute.set(result.attribute, (bySession = new Map()));
      bySession.set(result.session, row);
    }
  }
  return byAssessor;
}

/**
 * Assessors left out of the panel consensus from a session on (an open act-level level change),
 * on one attribute or (attribute null) on all of them.
 */
export interface ConsensusExclusion {
  assessor: string;
  attribute: string | null;
  fromSession: string;
}

/** Fewest other assessors for a consensus; with fewer the contract offset (vs the whole panel) is used. */
const MIN_CONSENSUS_ASSESSORS = 2;

/**
 * Level relative to a consensus one assessor cannot move (docs/methods.md §3.9, "Panel reference
 * (robust consensus)"): per session and attribute, the assessor's offset minus the MEDIAN of the
 * other assessors' offsets. Offsets are all taken against the same panel product means, so the
 * difference is the assessor's mean minus the median of the others' means on the same products;
 * a mean of the others would move by 1/(A − 1) of a drifter's change and echo it into everyone
 * else's chart. Assessors in `exclusions` are left out of the others from their session on
 * (falling back to all others when fewer than two remain). Returns assessor → attribute →
 * session → level (scale points).
 */
export function robustLevelLookup(history: PanelHistory, exclusions: readonly ConsensusExclusion[] = []): Map<string, Map<string, Map<string, number>>> {
  const order = new Map(history.sessions.map((s, i) => [s.label, i]));
  const excludedAt = (assessor: string, attribute: string, session: string): boolean => {
    const at = order.get(session) ?? -1;
    return exclusions.some((e) => e.assessor === assessor && (e.attribute === null || e.attribute === attribute) && at >= (order.get(e.fromSession) ?? Infinity));
  };
  const out = new Map<string, Map<string, Map<string, number>>>();
  for (const result of history.results) {
    const rows = result.indices.filter((row): row is typeof row & { offset: number } => row.offset !== null && Number.isFinite(row.offset));
    const kept = exclusions.length ? rows.filter((row) => !excludedAt(row.assessor, result.attribute, result.session)) : rows;
    for (const row of rows) {
      let others = kept.filter((o) => o.assessor !== row.assessor);
      if (others.length < MIN_CONSENSUS_ASSESSORS) others = rows.filter((o) => o.assessor !== row.assessor);
      const value = others.length >= MIN_CONSENSUS_ASSESSORS ? row.offset - median(others.map((o) => o.offset)) : row.offset;
      let byAttribute = out.get(row.assessor);
      if (!byAttribute) out.set(row.assessor, (byAttribute = new Map()));
      let bySession = byAttribute.get(result.attribute);
      if (!bySession) byAttribute.set(result.attribute, (bySession = new Map()));
      bySession.set(result.session, value);
    }
  }
  return out;
}

export interface AssessorSeriesOptions {
  /** Assessors left out of the level consensus (see robustLevelLookup). */
  levelExclusions?: readonly ConsensusExclusion[];
}

/**
 * Every assessor × attribute series of the given kinds (default: all five). The level series is
 * the level against the robust consensus of the other assessors (robustLevelLookup), not the
 * contract offset, so that one assessor's change does not show on everyone else's chart.
 */
export function buildAssessorSeries(history: PanelHistory, kinds: readonly IndexSeriesKind[] = INDEX_SERIES_KINDS, options: AssessorSeriesOptions = {}): AssessorSeries[] {
  const lookup = indexLookup(history);
  const robust = kinds.includes('level') ? robustLevelLookup(history, options.levelExclusions) : null;
  const out: AssessorSeries[] = [];
  for (const [assessor, byAttribute] of [...lookup].sort((a, b) => a[0].localeCompare(b[0]))) {
    for (const attribute of history.attributes) {
      const bySession = byAttribute.get(attribute.name);
      if (!bySession) continue;
      for (const kind of kinds) {
        out.push({
          assessor,
          attribute: attribute.name,
          kind,
          points: history.sessions.map((s) => {
            const row = bySession.get(s.label);
            const value = !row ? null : kind === 'level' ? (robust?.get(assessor)?.get(attribute.name)?.get(s.label) ?? null) : seriesValue(kind, row);
            return { session: s.label, date: s.date, value };
          }),
        });
      }
    }
  }
  return out;
}

/** Sessions at which an assessor's baselines restart: retraining events for them or the whole panel. */
export function restartSessionsFor(history: PanelHistory, assessor: string | null): string[] {
  return history.events
    .filter((e) => e.kind === 'retraining' && (e.assessor === null || e.assessor === assessor))
    .map((e) => e.session);
}

export interface ReferencePeriod {
  from: string;
  to: string;
  /** The panel's sessions from `from` to `to` in time order (inclusive). */
  sessions: ReadonlySet<string>;
  /** null: set for the whole panel. */
  assessor: string | null;
}

/**
 * The reference period the user picked for an assessor's chart baselines: their own if one is
 * recorded, else the whole panel's; the latest recorded wins. null: baselines from first values.
 * `assessor` null asks for the whole panel's period (panel-level charts, product effects).
 */
export function referencePeriodFor(history: PanelHistory, assessor: string | null): ReferencePeriod | null {
  const periods = history.events.filter((e) => e.kind === 'reference-period' && e.untilSession);
  const pick = (scope: string | null) => {
    const matching = periods.filter((e) => e.assessor === scope);
    return matching.length > 0 ? matching.reduce((a, b) => (b.id > a.id ? b : a)) : null;
  };
  const event = (assessor !== null ? pick(assessor) : null) ?? pick(null);
  if (!event) return null;
  const labels = history.sessions.map((s) => s.label);
  const fromIndex = labels.indexOf(event.session);
  const toIndex = labels.indexOf(event.untilSession as string);
  // A period whose sessions were since removed from the panel no longer applies.
  if (fromIndex < 0 || toIndex < fromIndex) return null;
  return { from: event.session, to: event.untilSession as string, sessions: new Set(labels.slice(fromIndex, toIndex + 1)), assessor: event.assessor };
}

/** Sessions at which the reference-product charts restart: new control batches (methods §3.6). */
export function controlBatchSessions(history: PanelHistory): string[] {
  return history.events.filter((e) => e.kind === 'control-batch').map((e) => e.session);
}

/**
 * Per-assessor summary series (methods §3.1, CP): each attribute's series is standardised with its
 * own baseline (z), and the summary at a session is the median of the z-values available there.
 * The summary is then baselined and charted like any other series.
 */
export function summarySeries(attributeSeries: readonly SeriesPoint[][], options: SegmentOptions): SeriesPoint[] {
  if (attributeSeries.length === 0) return [];
  const zBySession = new Map<string, number[]>();
  for (const series of attributeSeries) {
    for (const segment of standardiseSegments(series, options)) {
      for (const point of segment.points) {
        let list = zBySession.get(point.session);
        if (!list) zBySession.set(point.session, (list = []));
        list.push(point.z);
      }
    }
  }
  return attributeSeries[0].map((p) => {
    const list = zBySession.get(p.session);
    return { session: p.session, date: p.date, value: list && list.length > 0 ? median(list) : null };
  });
}

export function median(values: readonly number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const middle = sorted.length >> 1;
  return sorted.length % 2 === 1 ? sorted[middle] : (sorted[middle - 1] + sorted[middle]) / 2;
}

export interface ReferenceProductSeries {
  product: string;
  attribute: string;
  /** Panel mean of the control per session (from the session fit's product means). */
  panelMean: SeriesPoint[];
  /** Per assessor: control cell mean minus the mean of the other assessors' control cell means (needs ratings). */
  assessorDeviation: { assessor: string; points: SeriesPoint[] }[];
}

/** Control-product charts' inputs (methods §3.6). Assessor deviations only for sessions with ratings. */
export function buildReferenceSeries(history: PanelHistory): ReferenceProductSeries[] {
  const out: ReferenceProductSeries[] = [];
  const resultByKey = new Map(history.results.map((r) => [`${r.session}\u0000${r.attribute}`, r]));
  // cell means of the control by product → attribute → session → assessor
  const cells = new Map<string, { sum: number; n: number }>();
  for (const rating of history.ratings ?? []) {
    if (!history.referenceProducts.includes(rating.product)) continue;
    const key = `${rating.product}\u0000${rating.attribute}\u0000${rating.session}\u0000${rating.assessor}`;
    const cell = cells.get(key) ?? { sum: 0, n: 0 };
    cell.sum += rating.value;
    cell.n += 1;
    cells.set(key, cell);
  }
  const assessors = [...new Set((history.ratings ?? []).map((r) => r.assessor))].sort();
  for (const product of history.referenceProducts) {
    for (const attribute of history.attributes) {
      const panelMean = history.sessions.map((s) => {
        const mean = resultByKey.get(`${s.label}\u0000${attribute.name}`)?.fit.productMeans.find((m) => m.product === product)?.mean;
        return { session: s.label, date: s.date, value: mean ?? null };
      });
      const assessorDeviation = assessors.map((assessor) => ({
        assessor,
        points: history.sessions.map((s) => {
          const own = cells.get(`${product}\u0000${attribute.name}\u0000${s.label}\u0000${assessor}`);
          let othersSum = 0;
          let othersN = 0;
          for (const other of assessors) {
            if (other === assessor) continue;
            const cell = cells.get(`${product}\u0000${attribute.name}\u0000${s.label}\u0000${other}`);
            if (cell) {
              othersSum += cell.sum / cell.n;
              othersN++;
            }
          }
          const value = own && othersN >= 2 ? own.sum / own.n - othersSum / othersN : null;
          return { session: s.label, date: s.date, value };
        }),
      }));
      if (panelMean.some((p) => p.value !== null)) out.push({ product, attribute: attribute.name, panelMean, assessorDeviation });
    }
  }
  return out;
}
