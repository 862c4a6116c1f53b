/** Retraining before/after evaluation; Welch's t against R's t.test (test/fixtures/json/spc.json). */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { evaluateRetraining, welchOneSided } from '../../../analysis/flags/retraining.js';
import { DEFAULT_THRESHOLDS } from '../../../analysis/flags/settings.js';
import { syntheticHistory } from './helpers/synthetic-history.js';

const welch = (JSON.parse(readFileSync(new URL('../../fixtures/json/spc.json', import.meta.url), 'utf8')) as { welch: { before: number[]; after: number[]; t: number; df: number; pValue: number } }).welch;

describe('one-sided Welch t test', () => {
  it('matches R t.test(alternative = "greater", var.equal = FALSE)', () => {
    const result = welchOneSided(welch.before, welch.after);
    expect(result?.t).toBeCloseTo(welch.t, 10);
    expect(result?.df).toBeCloseTo(welch.df, 10);
    expect(result?.pValue).toBeCloseTo(welch.pValue, 10);
  });
});

describe('evaluateRetraining', () => {
  it('closes when a lenient assessor is back in line after the event', () => {
    const history = syntheticHistory({ seed: 41, nSessions: 30, faults: [{ kind: 'lenient', assessor: 'A04', size: 1.5, toSession: 19 }] });
    const evaluation = evaluateRetraining(history, 'A04', 'S21', DEFAULT_THRESHOLDS);
    expect(evaluation.kindsBefore).toContain('lenient');
    expect(evaluation.decision).toBe('close');
    const level = evaluation.comparisons.find((c) => c.index === 'level');
    expect(level?.before.sessions).toHaveLength(8);
    expect(level?.after.sessions).toHaveLength(10);
    expect(level?.improved).toBe(true);
    expect(evaluation.message).toMatch(/^After the retraining at S21, A04's indices improved: level /);
  });
  it('keeps the flag when nothing changed', () => {
    const history = syntheticHistory({ seed: 42, nSessions: 30, faults: [{ kind: 'inconsistent', assessor: 'A05' }] });
    const evaluation = evaluateRetraining(history, 'A05', 'S21', DEFAULT_THRESHOLDS);
    expect(evaluation.kindsBefore).toContain('inconsistent');
    expect(evaluation.decision).toBe('keep');
    expect(evaluation.comparisons.find((c) => c.index === 'repeatability')?.improved).toBe(false);
  });
  it('waits while there are too few sessions after the event', () => {
    const history = syntheticHistory({ seed: 43, nSessions: 22, faults: [{ kind: 'harsh', assessor: 'A02', size: 1.5, toSession: 19 }] });
    const evaluation = evaluateRetraining(history, 'A02', 'S21', DEFAULT_THRESHOLDS);
    expect(evaluation.decision).toBe('wait');
    expect(evaluation.nSessionsAfter).toBe(2);
  });
  it('has nothing to compare for an assessor without flags', () => {
    const evaluation = evaluateRetraining(syntheticHistory({ seed: 44, nSessions: 30 }), 'A01', 'S21', DEFAULT_THRESHOLDS);
    expect(evaluation.comparisons).toEqual([]);
    expect(evaluation.decision).toBe('close');
  });
});
