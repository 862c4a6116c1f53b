/** unstable-product: planted step and period LRT are flagged; stable products are not. */
import { describe, expect, it } from 'vitest';
import { buildFlags } from '../../../analysis/flags/build-flags.js';
import { productEffectSeriesOf } from '../../../analysis/flags/product-flags.js';
import { DEFAULT_THRESHOLDS } from '../../../analysis/flags/settings.js';
import { syntheticHistory } from './helpers/synthetic-history.js';

describe('unstable-product', () => {
  it('a 1.5-point step of T01 on attr2 from session 21 is flagged act with the change session', () => {
    for (const seed of [31, 32, 33]) {
      const history = syntheticHistory({ seed, nSessions: 36, faults: [{ kind: 'unstable-product', product: 'T01', attributes: ['attr2'], fromSession: 20, size: 1.5 }] });
      const all = buildFlags(history).filter((f) => f.kind === 'unstable-product');
      const hits = all.filter((f) => f.product === 'T01' && f.attribute === 'attr2');
      expect(hits.map((f) => [f.product, f.attribute, f.severity])).toEqual([['T01', 'attr2', 'act']]);
      // The other 19 product × attribute charts are stable: no act flag among them.
      expect(all.filter((f) => f !== hits[0] && f.severity === 'act')).toEqual([]);
      expect(hits[0].evidence.relativeTo).toBe('reference');
      expect(Number(hits[0].firstSession.slice(1))).toBeGreaterThanOrEqual(19);
      expect(Number(String(hits[0].evidence.signalSession).slice(1))).toBeLessThanOrEqual(23);
      expect(hits[0].message).toMatch(/^Since S\d\d, T01's attr2 relative to REF has been about 1\.\d points higher than in the baseline sessions/);
    }
  });
  it('stable products: no act flag, watch flags within the false-alarm budget (6 seeds)', () => {
    // Budget: 1 watch-level false alarm per year across the 20 product × attribute charts, i.e.
    // about 20 × 40 / 1040 ≈ 0.8 per 40-session history; allow twice the expected 4.6 in 6 seeds.
    let nWatch = 0;
    for (const seed of [1, 2, 3, 4, 5, 6]) {
      const flags = buildFlags(syntheticHistory({ seed, nSessions: 40 })).filter((f) => f.kind === 'unstable-product');
      expect(flags.filter((f) => f.severity === 'act'), `seed ${seed}`).toEqual([]);
      nWatch += flags.length;
    }
    expect(nWatch).toBeLessThanOrEqual(9);
  });
  it('period-model LRT: act below 0.01, watch below 0.05, nothing above', () => {
    const history = syntheticHistory({ seed: 2, nSessions: 20 });
    const sessions = history.sessions.slice(-12).map((s) => s.label);
    history.periodFits = [
      { attribute: 'attr1', sessions, productSessionVariance: 0.3, lrt: { likelihoodRatio: 9.1, pValue: 0.00128 } },
      { attribute: 'attr2', sessions, productSessionVariance: 0.1, lrt: { likelihoodRatio: 3.2, pValue: 0.0368 } },
      { attribute: 'attr3', sessions, productSessionVariance: 0, lrt: { likelihoodRatio: 0, pValue: 1 } },
    ];
    const hits = buildFlags(history).filter((f) => f.kind === 'unstable-product');
    expect(hits.map((f) => [f.attribute, f.severity, f.product])).toEqual([['attr1', 'act', null], ['attr2', 'watch', null]]);
    expect(hits[0].firstSession).toBe(sessions[0]);
    expect(typeof hits[0].evidence.kendallW).toBe('number');
  });
  it('period-model LRT: a significant but tiny product:session SD is not flagged, a moderate one only watched', () => {
    const history = syntheticHistory({ seed: 3, nSessions: 20 });
    const sessions = history.sessions.slice(-12).map((s) => s.label);
    history.periodFits = [
      // SD 0.08 on a 0–10 scale: the clean batch variation of the simulation suite (0.8 % of the range).
      { attribute: 'attr1', sessions, productSessionVariance: 0.0064, lrt: { likelihoodRatio: 12, pValue: 0.00027 } },
      // SD 0.3 (3 % of the range) with p < 0.01: above the watch guard, below the act guard.
      { attribute: 'attr2', sessions, productSessionVariance: 0.09, lrt: { likelihoodRatio: 12, pValue: 0.00027 } },
    ];
    const hits = buildFlags(history).filter((f) => f.kind === 'unstable-product' && f.evidence.test.startsWith('boundary'));
    expect(hits.map((f) => [f.attribute, f.severity])).toEqual([['attr2', 'watch']]);
    expect(hits[0].evidence.productSessionSdScaleFraction).toBeCloseTo(0.03, 12);
  });
});

describe('product-effect series', () => {
  it('are differences from the reference product when it is served in every session', () => {
    const history = syntheticHistory({ seed: 5, nSessions: 10, nAttributes: 2 });
    const series = productEffectSeriesOf(history, DEFAULT_THRESHOLDS);
    expect(series.map((s) => `${s.attribute}/${s.product}`)).toEqual(['attr1/T01', 'attr1/T02', 'attr1/T03', 'attr1/T04', 'attr2/T01', 'attr2/T02', 'attr2/T03', 'attr2/T04']);
    const first = history.results[0].fit.productMeans;
    const ref = first.find((m) => m.product === 'REF')!.mean;
    expect(series[0].points[0].value).toBeCloseTo(first.find((m) => m.product === 'T01')!.mean - ref, 12);
    expect(series[0].relativeTo).toBe('reference');
    expect(series[0].effects).toHaveLength(10);
  });
});
