/**
 * The demo exists so that reports have something to find: every planted demo problem is found by
 * the real flag engine, and the clean demo assessors get no act-level flag.
 */
import { describe, expect, it } from 'vitest';
import { buildFlags, DEFAULT_THRESHOLDS } from '../../analysis/flags/index.js';
import { DEMO_OPTIONS } from '../../demo/load-demo.js';
import { historyUpTo, runPanel } from '../simulation/pipeline.js';
import { scorePanel } from '../simulation/scoring.js';

describe('demo panel and the flag engine', () => {
  it('finds every planted demo problem and raises no act flag on a clean demo assessor', async () => {
    const planted = new Set(['A02', 'A03', 'A05', 'A07', 'A10']);
    const clean = Array.from({ length: DEMO_OPTIONS.nAssessors }, (_, i) => `A${String(i + 1).padStart(2, '0')}`).filter((a) => !planted.has(a));
    const run = await runPanel({ name: 'demo', options: DEMO_OPTIONS, cleanAssessors: clean });
    expect(new Set(run.panel.truth.map((f) => f.assessor).filter((a) => a !== null))).toEqual(planted);
    const flags = buildFlags(historyUpTo(run), DEFAULT_THRESHOLDS);
    const score = scorePanel(flags, run.panel.truth, clean, run.panel.sessions.length, 'demo');
    const missed = [...score.byKind.values()].flatMap((t) => t.missed);
    expect(missed).toEqual([]);
    expect([...score.byKind.values()].filter((t) => t.planted > 0).map((t) => t.kind)).toEqual([
      'lenient',
      'drift',
      'inconsistent',
      'unstable-product',
      'decimal-shift',
      'swapped-codes',
    ]);
    expect(score.cleanActFlags.map((f) => `${f.kind} ${f.assessor}`)).toEqual([]);
  }, 300_000);
});
