/**
 * The sudden-shift rule's size ("a jump of 2 of the assessor's SDs on most attributes",
 * docs/methods.md §3.10) is a panel setting: charts.jumpMinSd and charts.jumpAttributeShare.
 * Defaults reproduce the fixed rule; changing either changes the flags.
 */
import { describe, expect, it } from 'vitest';
import { buildFlags, DEFAULT_THRESHOLDS, validateThresholds, type PanelThresholds } from '../../../analysis/flags/index.js';
import { jumpRule, MIN_JUMP_SD } from '../../../analysis/monitor/jump.js';
import type { PanelHistory } from '../../../analysis/monitor/series.js';
import { ensurePanel } from '../../../store/import/log.js';
import { openStore } from '../../../store/open-store.js';
import { loadPanelThresholds, savePanelThresholds } from '../../../store/monitor-settings.js';
import { syntheticHistory } from './helpers/synthetic-history.js';

/** Adds a shift to the offsets of some attributes, then centres each session × attribute on the mean of all assessors. */
function shifted(history: PanelHistory, shift: (assessor: string, session: number, attribute: string) => number): PanelHistory {
  const order = new Map(history.sessions.map((s, i) => [s.label, i]));
  return {
    ...history,
    results: history.results.map((r) => {
      const raw = r.indices.map((row) => (row.offset as number) + shift(row.assessor, order.get(r.session) as number, r.attribute));
      const mean = raw.reduce((a, b) => a + b, 0) / raw.length;
      return { ...r, indices: r.indices.map((row, i) => ({ ...row, offset: raw[i] - mean })) };
    }),
  };
}

const withCharts = (charts: Partial<PanelThresholds['charts']>): PanelThresholds => ({ ...DEFAULT_THRESHOLDS, charts: { ...DEFAULT_THRESHOLDS.charts, ...charts } });
const jumpOf = (history: PanelHistory, thresholds: PanelThresholds, assessor: string) =>
  buildFlags(history, thresholds).find((f) => f.kind === 'drift' && f.assessor === assessor && f.evidence.pattern === 'jump');

describe('jump rule as a panel setting', () => {
  it('defaults reproduce the fixed rule (2 SDs on a majority of the attributes)', () => {
    expect(DEFAULT_THRESHOLDS.charts.jumpMinSd).toBe(MIN_JUMP_SD);
    expect(DEFAULT_THRESHOLDS.charts.jumpAttributeShare).toBe(0.5);
    const budget = 0.05 / (12 * 52);
    for (const n of [1, 3, 4, 7, 10]) {
      expect(jumpRule(n, budget, { minJumpSd: DEFAULT_THRESHOLDS.charts.jumpMinSd, attributeShare: DEFAULT_THRESHOLDS.charts.jumpAttributeShare })).toEqual(jumpRule(n, budget));
      expect(jumpRule(n, budget).minAttributes).toBe(Math.floor(n / 2) + 1);
    }
  });

  it('raising the smallest jump to 5 SDs turns a 1.3-point jump (median 3.5 SDs) into no jump flag', () => {
    const history = shifted(syntheticHistory({ seed: 7, nSessions: 40, nAssessors: 12, nAttributes: 10 }), (a, s) => (a === 'A05' && s >= 30 ? 1.3 : 0));
    const byDefault = jumpOf(history, DEFAULT_THRESHOLDS, 'A05');
    expect(byDefault?.firstSession).toBe('S31');
    expect(byDefault?.evidence.threshold).toMatch(/at least 2\.\d\d SDs/);
    const stricter = jumpOf(history, withCharts({ jumpMinSd: 5 }), 'A05');
    expect(stricter).toBeUndefined();
  });

  it('a jump on 4 of 10 attributes is a jump only when the share is lowered below 0.4', () => {
    const four = new Set(['attr1', 'attr2', 'attr3', 'attr4']);
    const history = shifted(syntheticHistory({ seed: 9, nSessions: 40, nAssessors: 12, nAttributes: 10 }), (a, s, attribute) => (a === 'A03' && s >= 30 && four.has(attribute) ? 3 : 0));
    expect(jumpOf(history, DEFAULT_THRESHOLDS, 'A03')).toBeUndefined();
    const lowered = jumpOf(history, withCharts({ jumpAttributeShare: 0.3 }), 'A03');
    expect(lowered?.firstSession).toBe('S31');
    expect(lowered?.evidence.threshold).toMatch(/on at least 4 of 10 attributes/);
  });

  it('is validated and saved with the other thresholds', () => {
    expect(validateThresholds({ charts: { jumpMinSd: 0 } }).problems.map((p) => p.path)).toEqual(['/charts/jumpMinSd']);
    expect(validateThresholds({ charts: { jumpAttributeShare: 1 } }).problems.map((p) => p.path)).toEqual(['/charts/jumpAttributeShare']);
    const { thresholds, problems } = validateThresholds({ charts: { jumpMinSd: 3, jumpAttributeShare: 0.7 } });
    expect(problems).toEqual([]);
    const db = openStore(':memory:');
    try {
      const id = ensurePanel(db, 'jump panel', '2026-01-05T00:00:00Z');
      savePanelThresholds(db, id, thresholds);
      const loaded = validateThresholds(loadPanelThresholds(db, id)?.thresholds);
      expect(loaded.thresholds.charts).toMatchObject({ jumpMinSd: 3, jumpAttributeShare: 0.7 });
    } finally {
      db.close();
    }
  });
});
