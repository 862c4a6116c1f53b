/**
 * Series built from stored results (methods §3.1): transformations, the per-assessor summary
 * (median of per-attribute z-scores), the reference-product series (panel mean from the fit;
 * assessor minus the mean of the other assessors' control cell means, hand-computed here) and the
 * sessions at which retraining restarts baselines.
 */
import { describe, expect, it } from 'vitest';
import type { Rating } from '../../../domain/ratings.js';
import { buildAssessorSeries, buildReferenceSeries, controlBatchSessions, restartSessionsFor, seriesValue, summarySeries } from '../../../analysis/monitor/series.js';
import { syntheticHistory } from '../flags/helpers/synthetic-history.js';

describe('series values', () => {
  const base = syntheticHistory({ seed: 1, nSessions: 1, nAssessors: 3, nAttributes: 1 }).results[0].indices[0];
  it('level is the offset; scaling, repeatability and discrimination are logged; agreement is atanh', () => {
    expect(seriesValue('level', { ...base, offset: -0.7 })).toBe(-0.7);
    expect(seriesValue('scaling', { ...base, scaling: Math.E })).toBeCloseTo(1, 12);
    expect(seriesValue('scaling', { ...base, scaling: -0.5 })).toBeNull();
    expect(seriesValue('repeatability', { ...base, repeatabilitySdRatio: 2 })).toBeCloseTo(Math.log(2), 12);
    expect(seriesValue('discrimination', { ...base, discriminationF: 0 })).toBeNull();
    expect(seriesValue('agreement', { ...base, agreementR: 0.5 })).toBeCloseTo(0.5493061443340549, 12);
    expect(seriesValue('agreement', { ...base, agreementR: 1 })).toBeCloseTo(Math.atanh(0.999), 12);
    expect(seriesValue('level', { ...base, offset: null })).toBeNull();
  });
});

describe('assessor series and summary', () => {
  const history = syntheticHistory({ seed: 2, nSessions: 12, nAssessors: 4, nAttributes: 3 });
  it('one point per session for every assessor × attribute × kind', () => {
    const series = buildAssessorSeries(history);
    expect(series).toHaveLength(4 * 3 * 5);
    expect(series.every((s) => s.points.length === 12)).toBe(true);
    const a2 = series.find((s) => s.assessor === 'A02' && s.attribute === 'attr3' && s.kind === 'level');
    const stored = history.results.find((r) => r.session === 'S05' && r.attribute === 'attr3')?.indices.find((i) => i.assessor === 'A02');
    // Level against the median of the other three assessors' offsets (computed by hand here).
    const others = history.results
      .find((r) => r.session === 'S05' && r.attribute === 'attr3')!
      .indices.filter((i) => i.assessor !== 'A02')
      .map((i) => i.offset as number)
      .sort((x, y) => x - y);
    expect(others).toHaveLength(3);
    expect(a2?.points[4].value).toBeCloseTo((stored?.offset as number) - others[1], 12);
  });
  it('summary = median over attributes of the per-attribute z-scores', () => {
    const level = buildAssessorSeries(history, ['level']).filter((s) => s.assessor === 'A01').map((s) => s.points);
    const summary = summarySeries(level, { baseline: { fullValues: 20, minimumValues: 8 } });
    const zOf = (points: typeof level[number], t: number) => {
      const v = points.map((p) => p.value as number);
      const centre = v.reduce((s, x) => s + x, 0) / v.length;
      let mr = 0;
      for (let i = 1; i < v.length; i++) mr += Math.abs(v[i] - v[i - 1]);
      return (v[t] - centre) / (mr / (v.length - 1) / 1.128);
    };
    for (const t of [0, 5, 11]) {
      const z = level.map((points) => zOf(points, t)).sort((a, b) => a - b);
      expect(summary[t].value).toBeCloseTo(z[1], 12);
    }
  });
  it('retraining events restart baselines for their assessor or for everybody', () => {
    const h = { ...history, events: [
      { id: 1, kind: 'retraining' as const, session: 'S05', assessor: 'A02', note: '' },
      { id: 2, kind: 'retraining' as const, session: 'S09', assessor: null, note: '' },
      { id: 3, kind: 'control-batch' as const, session: 'S07', assessor: null, note: '' },
    ] };
    expect(restartSessionsFor(h, 'A02')).toEqual(['S05', 'S09']);
    expect(restartSessionsFor(h, 'A03')).toEqual(['S09']);
    expect(controlBatchSessions(h)).toEqual(['S07']);
  });
});

describe('reference product series (methods §3.6)', () => {
  it('panel mean from the fit and each assessor minus the rest of the panel from the ratings', () => {
    const history = syntheticHistory({ seed: 3, nSessions: 2, nAssessors: 3, nAttributes: 1 });
    const rating = (session: string, assessor: string, replicate: number, value: number): Rating => ({ session, date: '2026-01-05', assessor, product: 'REF', replicate, attribute: 'attr1', value, code: null });
    history.ratings = [
      rating('S01', 'A01', 1, 4), rating('S01', 'A01', 2, 6), // cell mean 5
      rating('S01', 'A02', 1, 3), // 3
      rating('S01', 'A03', 1, 7), rating('S01', 'A03', 2, 8), // 7.5
      rating('S02', 'A01', 1, 5), // S02: only two assessors → A01 has one other → no deviation
      rating('S02', 'A02', 1, 6),
    ];
    const [series] = buildReferenceSeries(history);
    expect(series.product).toBe('REF');
    expect(series.panelMean.map((p) => p.value)).toEqual(history.results.map((r) => r.fit.productMeans.find((m) => m.product === 'REF')?.mean));
    const a1 = series.assessorDeviation.find((d) => d.assessor === 'A01');
    expect(a1?.points[0].value).toBeCloseTo(5 - (3 + 7.5) / 2, 12);
    expect(a1?.points[1].value).toBeNull();
    expect(series.assessorDeviation.find((d) => d.assessor === 'A02')?.points[0].value).toBeCloseTo(3 - (5 + 7.5) / 2, 12);
  });
});
