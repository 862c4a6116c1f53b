/**
 * Drift and jump flags against the robust panel reference (docs/methods.md §3.9, "Panel reference" and
 * "Sudden shifts"). The synthetic indices are turned into contract offsets (each assessor minus the
 * mean of ALL assessors, the assessor included), which is what makes one drifter echo into
 * everybody else's offsets: the flags must not show that echo.
 */
import { describe, expect, it } from 'vitest';
import { buildFlags, DEFAULT_THRESHOLDS } from '../../../analysis/flags/index.js';
import { jumpRule } from '../../../analysis/monitor/jump.js';
import { normalCdf } from '../../../analysis/distributions/index.js';
import type { PanelHistory } from '../../../analysis/monitor/series.js';
import { syntheticHistory } from './helpers/synthetic-history.js';

/** Adds `shift(assessor, sessionIndex)` to the offsets, then centres each session × attribute on the mean of all assessors. */
function contractOffsets(history: PanelHistory, shift: (assessor: string, session: number) => number): PanelHistory {
  const order = new Map(history.sessions.map((s, i) => [s.label, i]));
  return {
    ...history,
    results: history.results.map((r) => {
      const raw = r.indices.map((row) => (row.offset as number) + shift(row.assessor, order.get(r.session) as number));
      const mean = raw.reduce((a, b) => a + b, 0) / raw.length;
      return { ...r, indices: r.indices.map((row, i) => ({ ...row, offset: raw[i] - mean })) };
    }),
  };
}

describe('robust panel reference', () => {
  it('one assessor drifting +1.3 points gives no downward (echo) drift flag to anyone else (12 assessors, 3 seeds)', () => {
    for (const seed of [41, 42, 43]) {
      // +0.065 per session over the last 20 of 40 sessions: +1.3 by the end on every attribute.
      const history = contractOffsets(syntheticHistory({ seed, nSessions: 40, nAssessors: 12, nAttributes: 8 }), (a, s) => (a === 'A01' && s >= 20 ? 0.065 * (s - 19) : 0));
      // Check that the echo is there to be removed: the others' contract offsets fall by 1.3/12 ≈ 0.11.
      const late = history.results.filter((r) => r.session === 'S40').flatMap((r) => r.indices.filter((i) => i.assessor !== 'A01').map((i) => i.offset as number));
      const early = history.results.filter((r) => r.session === 'S10').flatMap((r) => r.indices.filter((i) => i.assessor !== 'A01').map((i) => i.offset as number));
      const meanOf = (xs: number[]) => xs.reduce((a, b) => a + b, 0) / xs.length;
      expect(meanOf(early) - meanOf(late)).toBeCloseTo(1.3 / 12, 1);
      const drift = buildFlags(history, DEFAULT_THRESHOLDS).filter((f) => f.kind === 'drift');
      expect(drift.some((f) => f.assessor === 'A01' && f.severity === 'act'), `seed ${seed}`).toBe(true);
      // The echo would be downward; upward watch flags elsewhere are the charts' ordinary false-alarm budget.
      expect(drift.filter((f) => f.assessor !== 'A01' && f.evidence.direction === 'down').map((f) => `${f.assessor} ${f.attribute} ${f.message}`), `seed ${seed}`).toEqual([]);
      expect(drift.filter((f) => f.assessor !== 'A01' && f.severity === 'act')).toEqual([]);
    }
  });
});

describe('sudden shifts', () => {
  it('a +2.5 point jump on every attribute is an act flag in its own session, worded as a jump with its size', () => {
    const history = contractOffsets(syntheticHistory({ seed: 7, nSessions: 40, nAssessors: 12, nAttributes: 10 }), (a, s) => (a === 'A05' && s >= 30 ? 2.5 : 0));
    for (const n of [31, 35, 40]) {
      const upTo = { ...history, sessions: history.sessions.slice(0, n), results: history.results.filter((r) => Number(r.session.slice(1)) <= n) };
      const flag = buildFlags(upTo, DEFAULT_THRESHOLDS).find((f) => f.kind === 'drift' && f.assessor === 'A05');
      expect(flag?.severity, `after ${n} sessions`).toBe('act');
      expect(flag?.firstSession).toBe('S31');
      expect(flag?.evidence.pattern).toBe('jump');
      // The reference moves by at most one neighbour gap, so the jump reads as about 2.5 points.
      expect(Math.abs((flag?.evidence.jumpPoints as number) - 2.5)).toBeLessThan(0.35);
      expect(flag?.message).toMatch(/^In S31, A05's ratings rose by about 2\.\d points on (9|10) of 10 attributes/);
    }
  });

  it('a slow drift is not called a jump', () => {
    const history = contractOffsets(syntheticHistory({ seed: 8, nSessions: 40, nAssessors: 12, nAttributes: 10 }), (a, s) => (a === 'A03' && s >= 20 ? 0.08 * (s - 19) : 0));
    const flag = buildFlags(history, DEFAULT_THRESHOLDS).find((f) => f.kind === 'drift' && f.assessor === 'A03');
    expect(flag).toBeDefined();
    expect(flag?.evidence.pattern).toBeUndefined();
  });

  it('the rule is sized for the number of charts: 2·P(Binomial(n, p) ≥ m) within the budget (common practice, no source)', () => {
    const tail = (n: number, m: number, p: number) => {
      let total = 0;
      for (let k = m; k <= n; k++) {
        let c = 1;
        for (let i = 0; i < k; i++) c = (c * (n - i)) / (i + 1);
        total += c * p ** k * (1 - p) ** (n - k);
      }
      return total;
    };
    const budget = 0.05 / (12 * 52);
    const ten = jumpRule(10, budget);
    expect(ten).toMatchObject({ thresholdSd: 2, minAttributes: 6 });
    expect(ten.chancePerSession).toBeCloseTo(2 * tail(10, 6, 1 - normalCdf(2 / Math.sqrt(1.25))), 12);
    expect(ten.chancePerSession).toBeLessThanOrEqual(budget);
    // With 3 attributes, 2 SDs on 2 of 3 would fire about once a year per assessor: the threshold rises.
    const three = jumpRule(3, budget);
    expect(three.minAttributes).toBe(2);
    expect(three.thresholdSd).toBeGreaterThan(2.5);
    expect(three.chancePerSession).toBeLessThanOrEqual(budget);
  });
});
