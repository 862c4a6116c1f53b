/**
 * Each model-based flag kind planted in a seeded synthetic history is found, and clean histories
 * give no act-level flags. Synthetic indices: test/analysis/flags/helpers/synthetic-history.ts.
 */
import { describe, expect, it } from 'vitest';
import { FLAG_KINDS, type Flag, type FlagKind } from '../../../domain/flags.js';
import { buildFlags } from '../../../analysis/flags/build-flags.js';
import { DEFAULT_THRESHOLDS } from '../../../analysis/flags/settings.js';
import { syntheticHistory, type SyntheticFault } from './helpers/synthetic-history.js';

const SEEDS = [11, 12, 13];

function flagsWith(fault: SyntheticFault, seed: number): Flag[] {
  return buildFlags(syntheticHistory({ seed, nSessions: 30, faults: [fault] }));
}

function contractShape(flag: Flag): void {
  expect(FLAG_KINDS).toContain(flag.kind);
  expect(['watch', 'act']).toContain(flag.severity);
  expect(typeof flag.firstSession).toBe('string');
  expect(typeof flag.evidence.test).toBe('string');
  expect(typeof flag.evidence.threshold).toBe('string');
  expect(Number.isFinite(flag.evidence.n)).toBe(true);
  // one sentence: ends with a full stop, no line breaks, no second sentence start
  expect(flag.message).toMatch(/^[^\n]+\.$/);
  expect(flag.message).not.toMatch(/\. [A-Z]/);
}

const PLANTED: { kind: FlagKind; fault: SyntheticFault; severity: 'act' | 'watch'; attributeWide: boolean }[] = [
  { kind: 'lenient', fault: { kind: 'lenient', assessor: 'A03', size: 1.3 }, severity: 'act', attributeWide: true },
  { kind: 'harsh', fault: { kind: 'harsh', assessor: 'A04', size: 1.3, attributes: ['attr2'] }, severity: 'act', attributeWide: false },
  { kind: 'inconsistent', fault: { kind: 'inconsistent', assessor: 'A05' }, severity: 'act', attributeWide: true },
  { kind: 'non-discriminating', fault: { kind: 'non-discriminating', assessor: 'A06' }, severity: 'act', attributeWide: true },
  { kind: 'disagreement', fault: { kind: 'disagreement', assessor: 'A07', attributes: ['attr1'] }, severity: 'act', attributeWide: false },
  { kind: 'reversed', fault: { kind: 'reversed', assessor: 'A08', attributes: ['attr3'] }, severity: 'act', attributeWide: false },
  { kind: 'scale-compression', fault: { kind: 'scale-compression', assessor: 'A09' }, severity: 'act', attributeWide: true },
  { kind: 'scale-expansion', fault: { kind: 'scale-expansion', assessor: 'A10', attributes: ['attr4'] }, severity: 'act', attributeWide: false },
  { kind: 'drift', fault: { kind: 'drift', assessor: 'A02', fromSession: 20, size: 0.1 }, severity: 'act', attributeWide: true },
];

describe('planted assessor faults are flagged', () => {
  for (const { kind, fault, severity, attributeWide } of PLANTED) {
    it(`${kind}`, () => {
      for (const seed of SEEDS) {
        const flags = flagsWith(fault, seed);
        flags.forEach(contractShape);
        const hit = flags.find((f) => f.kind === kind && f.assessor === fault.assessor);
        expect(hit, `seed ${seed}`).toBeDefined();
        expect(hit?.severity).toBe(severity);
        expect(hit?.attribute).toBe(attributeWide ? null : fault.attributes?.[0]);
        expect(hit?.product).toBeNull();
      }
    });
  }
  it('lenient message reads as one neutral sentence with a CI', () => {
    const flags = buildFlags(syntheticHistory({ seed: 3, nSessions: 30, faults: [{ kind: 'lenient', assessor: 'A03', size: 1.4, attributes: ['attr2'] }] }));
    const hit = flags.find((f) => f.kind === 'lenient' && f.assessor === 'A03');
    expect(hit?.message).toMatch(/^Across the last 8 sessions, A03's attr2 ratings averaged \d\.\d points above the rest of the panel \(95% CI \d\.\d to \d\.\d\)\.$/);
    expect(hit?.evidence.qValue).toBeLessThan(0.05);
    expect(hit?.firstSession).toBe('S23');
  });
  it('slow drift (0.05 points/week on one attribute from session 21) is flagged within 16 sessions', () => {
    const flags = buildFlags(syntheticHistory({ seed: 5, nSessions: 40, faults: [{ kind: 'drift', assessor: 'A01', fromSession: 20, size: 0.05, attributes: ['attr1'] }] }));
    const hit = flags.find((f) => f.kind === 'drift' && f.assessor === 'A01');
    expect(hit).toBeDefined();
    const signal = Number(String(hit?.evidence.signalSession).slice(1));
    expect(signal).toBeGreaterThan(20);
    expect(signal).toBeLessThanOrEqual(21 + 16);
  });
});

describe('clean histories', () => {
  it('give no act-level flags (6 seeds, 10 assessors × 5 attributes × 30 sessions)', () => {
    for (const seed of [1, 2, 3, 4, 5, 6]) {
      const flags = buildFlags(syntheticHistory({ seed, nSessions: 30 }));
      expect(flags.filter((f) => f.severity === 'act'), `seed ${seed}`).toEqual([]);
    }
  });
  for (const kind of ['inconsistent', 'disagreement', 'reversed', 'scale-compression', 'scale-expansion'] as FlagKind[]) {
    it(`no ${kind} flag at all`, () => {
      for (const seed of [1, 2, 3, 4, 5, 6]) expect(buildFlags(syntheticHistory({ seed, nSessions: 30 })).filter((f) => f.kind === kind)).toEqual([]);
    });
  }
  for (const kind of ['lenient', 'harsh', 'drift', 'non-discriminating'] as FlagKind[]) {
    it(`${kind}: at most a few watch flags over 6 × 50 clean assessor-attribute pairs`, () => {
      let n = 0;
      for (const seed of [1, 2, 3, 4, 5, 6]) n += buildFlags(syntheticHistory({ seed, nSessions: 30 })).filter((f) => f.kind === kind).length;
      expect(n).toBeLessThanOrEqual(6);
    });
  }
  it('the planted assessor is the only one flagged for its kind', () => {
    const flags = flagsWith({ kind: 'inconsistent', assessor: 'A05' }, 21);
    expect(flags.filter((f) => f.kind === 'inconsistent').map((f) => f.assessor)).toEqual(['A05']);
  });
});

describe('options and settings', () => {
  it('since keeps only flags whose evidence reaches that session', () => {
    const history = syntheticHistory({ seed: 4, nSessions: 30, faults: [{ kind: 'lenient', assessor: 'A03', size: 1.3 }] });
    expect(buildFlags(history, DEFAULT_THRESHOLDS, { since: 'S30' }).some((f) => f.kind === 'lenient')).toBe(true);
  });
  it('a retraining event restarts the drift baseline (no drift flag from the old level)', () => {
    const history = syntheticHistory({ seed: 8, nSessions: 40, faults: [{ kind: 'lenient', assessor: 'A02', size: 2, fromSession: 10 }] });
    expect(buildFlags(history).some((f) => f.kind === 'drift' && f.assessor === 'A02')).toBe(true);
    history.events.push({ id: 1, kind: 'retraining', session: 'S11', assessor: 'A02', note: 'refresher on anchors' });
    expect(buildFlags(history).some((f) => f.kind === 'drift' && f.assessor === 'A02')).toBe(false);
  });
});

describe('robustness', () => {
  it('empty, one-session and all-undefined histories give no flags and no errors', () => {
    const empty = { sessions: [], attributes: [], referenceProducts: [], results: [], importFindings: [], events: [] };
    expect(buildFlags(empty)).toEqual([]);
    expect(buildFlags(syntheticHistory({ seed: 1, nSessions: 1 }))).toEqual([]);
    const blank = syntheticHistory({ seed: 2, nSessions: 12 });
    for (const result of blank.results) {
      result.productTestP = null;
      result.indices = result.indices.map((row) => ({
        ...row,
        offset: null, offsetT: null, offsetP: null, discriminationF: null, discriminationP: null, repeatabilitySdRatio: null,
        repeatabilityMSE: null, agreementR: null, scaling: null, scalingP: null, reasons: ['few-products' as const],
      }));
    }
    expect(buildFlags(blank)).toEqual([]);
  });
  it('is deterministic', () => {
    const history = syntheticHistory({ seed: 9, nSessions: 30, faults: [{ kind: 'drift', assessor: 'A01', fromSession: 15, size: 0.1 }] });
    expect(JSON.stringify(buildFlags(history))).toBe(JSON.stringify(buildFlags(history)));
  });
});
