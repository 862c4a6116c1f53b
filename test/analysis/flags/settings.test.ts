/** The thresholds settings object: defaults valid, partial JSON merged, problems with paths. */
import { describe, expect, it } from 'vitest';
import { DEFAULT_THRESHOLDS, PanelThresholdsSchema, validateThresholds } from '../../../analysis/flags/settings.js';

describe('validateThresholds', () => {
  it('accepts the defaults and an empty object (defaults filled in)', () => {
    expect(validateThresholds(DEFAULT_THRESHOLDS)).toEqual({ thresholds: DEFAULT_THRESHOLDS, problems: [] });
    expect(validateThresholds({})).toEqual({ thresholds: DEFAULT_THRESHOLDS, problems: [] });
  });
  it('merges a partial object', () => {
    const { thresholds, problems } = validateThresholds({ level: { actFraction: 0.15 }, recentSessions: 10 });
    expect(problems).toEqual([]);
    expect(thresholds.level).toEqual({ ...DEFAULT_THRESHOLDS.level, actFraction: 0.15 });
    expect(thresholds.recentSessions).toBe(10);
  });
  it('reports out-of-range values, wrong types and unknown keys with their path and a plain message', () => {
    const { thresholds, problems } = validateThresholds({ fdrLevel: 1.5, charts: { ewmaLambda: 'high' }, colour: 'red' });
    expect(thresholds).toEqual(DEFAULT_THRESHOLDS);
    const byPath = new Map(problems.map((p) => [p.path, p.message]));
    expect(byPath.get('/fdrLevel')).toBe('fdrLevel must be a number above 0 and below 1.');
    expect(byPath.get('/charts/ewmaLambda')).toMatch(/^charts\.ewmaLambda must be a number/);
    expect(byPath.get('/colour')).toBe('colour is not a known threshold.');
    for (const p of problems) expect(p.message).not.toMatch(/\/|Error|stack/);
  });
  it('checks that watch is looser than act', () => {
    const { problems } = validateThresholds({ level: { watchFraction: 0.2, actFraction: 0.1 } });
    expect(problems).toEqual([{ path: '/level/actFraction', message: 'The act offset must be at least the watch offset.' }]);
  });
  it('rejects a non-object', () => {
    expect(validateThresholds([1, 2]).problems).toEqual([{ path: '', message: 'The thresholds must be a JSON object.' }]);
  });
  it('documents every threshold with a source or "CP" in the schema', () => {
    const walk = (schema: { properties?: Record<string, unknown>; description?: string }, path: string): string[] => {
      if (schema.properties) return Object.entries(schema.properties).flatMap(([key, sub]) => walk(sub as typeof schema, `${path}/${key}`));
      return schema.description && /(CP|Source|source|\(\d{4}\)|methods §|Ours)/.test(schema.description) ? [] : [path];
    };
    expect(walk(PanelThresholdsSchema as never, '')).toEqual([]);
  });
});
