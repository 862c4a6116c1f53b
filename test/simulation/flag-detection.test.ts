/**
 * Detection goals of the flag engine on simulated panels (several seeds, 6–12 months, 12–14
 * assessors, every flag kind planted, clean assessors). Goals asserted: every kind's planted
 * faults found at watch or act ≥ 95 %; act-level flags on clean assessors ≤ 1 per 10 clean
 * assessor-years; every planted drift flagged (the median delay is reported by
 * bench/simulation-report.ts). The seeds are fixed, so these statistical properties are
 * deterministic. Slow (minutes): the real fits of several simulated years.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import { FLAG_KINDS } from '../../domain/flags.js';
import { buildFlags, DEFAULT_THRESHOLDS } from '../../analysis/flags/index.js';
import { measureFlagDetection, type SimulationReport } from './measure.js';

const FOUND_GOAL = 0.95;
const CLEAN_ACT_PER_10_ASSESSOR_YEARS_GOAL = 1;

describe('flag detection on simulated panels', () => {
  let report: SimulationReport;
  beforeAll(async () => {
    report = await measureFlagDetection((history) => buildFlags(history, DEFAULT_THRESHOLDS));
  }, 1_800_000);

  it('plants every flag kind on several panels and fits every session', () => {
    for (const tally of report.byKind) expect(tally.planted, tally.kind).toBeGreaterThanOrEqual(5);
    expect(report.panels.every((p) => p.nUnfitted === 0)).toBe(true);
    expect(report.cleanAssessorYears).toBeGreaterThan(50);
  });

  it.each([...FLAG_KINDS])('finds ≥ 95 %% of planted %s faults at watch or act', (kind) => {
    const tally = report.byKind.find((t) => t.kind === kind)!;
    expect(tally.missed, `missed: ${tally.missed.join(' | ')}`).toHaveLength(tally.planted - tally.found);
    expect(tally.found / tally.planted, `missed: ${tally.missed.join(' | ')}`).toBeGreaterThanOrEqual(FOUND_GOAL);
  });

  it('raises at most 1 act-level flag per 10 clean assessor-years', () => {
    const listed = report.cleanActFlags.map(({ panel, flag }) => `${panel} ${flag.kind} ${flag.assessor} ${flag.attribute ?? '-'} ${flag.firstSession}`);
    expect(report.cleanActPer10AssessorYears, listed.join(' | ')).toBeLessThanOrEqual(CLEAN_ACT_PER_10_ASSESSOR_YEARS_GOAL);
  });

  it('flags every planted drift within the simulated period', () => {
    expect(report.driftDelays.length).toBeGreaterThanOrEqual(10);
    for (const d of report.driftDelays) {
      expect(d.sessionsToFirstFlag, `${d.panel} ${d.assessor}`).not.toBeNull();
      // The delay is only meaningful when the drift flag was not already there before the drift.
      expect(d.flaggedBeforeStart, `${d.panel} ${d.assessor}`).toBe(false);
    }
    expect(report.medianDriftDelaySessions).not.toBeNull();
  });
});
