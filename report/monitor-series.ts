/**
 * Per assessor × attribute series of the five indices, on the scales the charts use
 * (methods notes §3.1): level offset as is (scale points); repeatability log(s_a/s_(−a));
 * discrimination log F; agreement atanh r; scaling log β̂ (only when β̂ > 0). The
 * transformations make the series closer to normal with roughly constant variance (common
 * practice, methods §3.1). The per-assessor summary is the median over attributes of each
 * attribute's standardised level offset, itself charted with its own baseline (methods §3.1).
 */
import type { AssessorSessionIndices } from '../analysis/indices/types.js';
import { standardiseSegments, type SegmentOptions, type SeriesPoint } from '../analysis/monitor/chart.js';

export type MeasureKey = 'offset' | 'repeatability' | 'discrimination' | 'agreement' | 'scaling';

export interface Measure {
  key: MeasureKey;
  label: string;
  yLabel: string;
  value(indices: AssessorSessionIndices): number | null;
}

function finiteOrNull(value: number | null | undefined): number | null {
  return value === null || value === undefined || !Number.isFinite(value) ? null : value;
}

export const MEASURES: readonly Measure[] = [
  { key: 'offset', label: 'Level offset', yLabel: 'offset (scale points)', value: (ix) => finiteOrNull(ix.offset) },
  {
    key: 'repeatability',
    label: 'Repeatability',
    yLabel: 'log(s_a / s_rest)',
    value: (ix) => (ix.repeatabilitySdRatio !== null && ix.repeatabilitySdRatio > 0 ? finiteOrNull(Math.log(ix.repeatabilitySdRatio)) : null),
  },
  {
    key: 'discrimination',
    label: 'Discrimination',
    yLabel: 'log F (products)',
    value: (ix) => (ix.discriminationF !== null && ix.discriminationF > 0 ? finiteOrNull(Math.log(ix.discriminationF)) : null),
  },
  {
    key: 'agreement',
    label: 'Agreement',
    yLabel: 'atanh r (with the rest)',
    // |r| = 1 has no finite atanh: clamp just inside (only reachable with 3 products).
    value: (ix) => (ix.agreementR === null ? null : finiteOrNull(Math.atanh(Math.max(-0.999, Math.min(0.999, ix.agreementR))))),
  },
  {
    key: 'scaling',
    label: 'Scaling',
    yLabel: 'log β (scale use)',
    value: (ix) => (ix.scaling !== null && ix.scaling > 0 ? finiteOrNull(Math.log(ix.scaling)) : null),
  },
];

export interface SessionRef {
  label: string;
  date: string;
}

/** Indices grouped by assessor → attribute → session. */
export type IndicesIndex = Map<string, Map<string, Map<string, AssessorSessionIndices>>>;

export function indexIndices(indices: readonly AssessorSessionIndices[]): IndicesIndex {
  const byAssessor: IndicesIndex = new Map();
  for (const ix of indices) {
    let byAttribute = byAssessor.get(ix.assessor);
    if (!byAttribute) byAssessor.set(ix.assessor, (byAttribute = new Map()));
    let bySession = byAttribute.get(ix.attribute);
    if (!bySession) byAttribute.set(ix.attribute, (bySession = new Map()));
    bySession.set(ix.session, ix);
  }
  return byAssessor;
}

/** One measure of one assessor and attribute, one point per session (null where not defined or absent). */
export function measureSeries(index: IndicesIndex, sessions: readonly SessionRef[], assessor: string, attribute: string, measure: Measure): SeriesPoint[] {
  const bySession = index.get(assessor)?.get(attribute);
  return sessions.map((s) => {
    const ix = bySession?.get(s.label);
    return { session: s.label, date: s.date, value: ix ? measure.value(ix) : null };
  });
}

function median(values: number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const mid = sorted.length >> 1;
  return sorted.length % 2 ? sorted[mid] : (sorted[mid - 1] + sorted[mid]) / 2;
}

/**
 * Summary series of an assessor: per session, the median over attributes of the standardised
 * level offsets z (each attribute baselined on its own). Null where no attribute has a z.
 */
export function summarySeries(
  index: IndicesIndex,
  sessions: readonly SessionRef[],
  assessor: string,
  attributes: readonly string[],
  options: SegmentOptions = {},
): SeriesPoint[] {
  const zBySession = new Map<string, number[]>();
  const offset = MEASURES[0];
  for (const attribute of attributes) {
    for (const segment of standardiseSegments(measureSeries(index, sessions, assessor, attribute, offset), options)) {
      for (const p of segment.points) {
        let list = zBySession.get(p.session);
        if (!list) zBySession.set(p.session, (list = []));
        list.push(p.z);
      }
    }
  }
  return sessions.map((s) => {
    const z = zBySession.get(s.label);
    return { session: s.label, date: s.date, value: z && z.length ? median(z) : null };
  });
}
