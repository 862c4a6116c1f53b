/**
 * The flag engine only reads its history: the refit's incremental history read (a memo from
 * store/read-memo.ts) shares parsed fits and indices between refits, which is safe only if
 * nothing modifies them. Run on a deeply frozen
 * history (any write would throw in these strict-mode modules), with the same output.
 */
import { describe, expect, it } from 'vitest';
import { buildFlags, DEFAULT_THRESHOLDS, evaluateRetraining } from '../../../analysis/flags/index.js';
import type { PanelHistory } from '../../../analysis/monitor/series.js';
import { equalityYearWithEvents } from './helpers/equality-histories.js';

function deepFreeze<T>(value: T): T {
  if (value && typeof value === 'object' && !Object.isFrozen(value)) {
    Object.freeze(value);
    for (const inner of Object.values(value)) deepFreeze(inner);
  }
  return value;
}

describe('the flag engine does not modify its input', () => {
  it('buildFlags and evaluateRetraining on a frozen history', () => {
    const open = equalityYearWithEvents();
    const frozen = deepFreeze(equalityYearWithEvents()) as PanelHistory;
    expect(Object.isFrozen(frozen.results[0].indices[0])).toBe(true);
    expect(() => {
      (frozen.results[0].indices[0] as { offset: number | null }).offset = 0;
    }).toThrow(TypeError);
    expect(buildFlags(frozen)).toEqual(buildFlags(open));
    const event = frozen.sessions[40].label;
    expect(evaluateRetraining(frozen, 'A07', event, DEFAULT_THRESHOLDS)).toEqual(evaluateRetraining(open, 'A07', event, DEFAULT_THRESHOLDS));
  });
});
