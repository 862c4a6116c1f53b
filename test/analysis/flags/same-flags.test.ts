/**
 * The flag engine's speed work must not change a single flag or number: its output on pinned
 * histories is compared, exactly (every number as JSON writes it), with what the engine gave
 * before that work (commit 0ceeede; see helpers/equality-histories.ts for the histories and how
 * the expectation was written). Each history is run without a memo, then twice with one memo
 * shared by all cases (as the refit's flags phase keeps one), so the memoised per-session
 * data-quality results and chart limits are compared as well as the first computation.
 */
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { buildFlags, createFlagsMemo, DEFAULT_THRESHOLDS, evaluateRetraining, type FlagsMemo } from '../../../analysis/flags/index.js';
import { equalityYear, equalityYearWithEvents } from './helpers/equality-histories.js';

const expected = JSON.parse(readFileSync(new URL('./expected-flags-0ceeede.json', import.meta.url), 'utf8')) as Record<string, unknown>;
const asJson = (value: unknown) => JSON.parse(JSON.stringify(value)) as unknown;
/**
 * Evidence fields added after 0ceeede (the reference-period baselines: where a chart baseline came
 * from and its first charted session); everything 0ceeede wrote is still compared exactly.
 */
const ADDED_BASELINE_FIELDS = ['source', 'chartedFromSession'];
const withoutAddedFields = (value: unknown): unknown =>
  JSON.parse(JSON.stringify(value), (key, v) => {
    if (key === 'baseline' && v && typeof v === 'object' && !Array.isArray(v)) {
      const kept = { ...(v as Record<string, unknown>) };
      for (const field of ADDED_BASELINE_FIELDS) delete kept[field];
      return kept;
    }
    return v;
  }) as unknown;

/**
 * Level flags are left out of the exact comparison, deliberate changes of method since 0ceeede:
 * drift is measured against the median of the other assessors (robust consensus) and sudden jumps
 * are flagged as such; lenient/harsh also need the offset to stand out from the panel's natural
 * offsets. test/analysis/flags/drift-robust.test.ts checks them.
 */
const CHANGED_KINDS = new Set(['drift', 'lenient', 'harsh']);
const withoutDrift = (value: unknown): unknown => (Array.isArray(value) ? value.filter((f: { kind?: string }) => !CHANGED_KINDS.has(f.kind ?? '')) : value);

describe('flags identical to the engine before the speed work (0ceeede)', () => {
  const year = equalityYear();
  const withEvents = equalityYearWithEvents();
  const memo = createFlagsMemo();
  const cases: [string, (memo?: FlagsMemo) => unknown][] = [
    ['year', (memo) => buildFlags(year, DEFAULT_THRESHOLDS, { memo })],
    ['yearWithoutRatings', (memo) => buildFlags({ ...year, ratings: [] }, DEFAULT_THRESHOLDS, { memo })],
    ['year51', (memo) => buildFlags(equalityYear(51), DEFAULT_THRESHOLDS, { memo })],
    ['withEvents', (memo) => buildFlags(withEvents, DEFAULT_THRESHOLDS, { memo })],
    ['since', (memo) => buildFlags(year, DEFAULT_THRESHOLDS, { since: year.sessions[45].label, memo })],
    ['retraining', (memo) => evaluateRetraining(withEvents, 'A07', withEvents.sessions[40].label, DEFAULT_THRESHOLDS, { memo })],
  ];
  for (const [name, run] of cases) {
    it(`${name}: without a memo, then first and memoised runs with one`, () => {
      expect(expected[name]).toBeDefined();
      expect(withoutDrift(withoutAddedFields(run()))).toEqual(withoutDrift(expected[name]));
      expect(withoutDrift(withoutAddedFields(run(memo)))).toEqual(withoutDrift(expected[name]));
      expect(withoutDrift(withoutAddedFields(run(memo)))).toEqual(withoutDrift(expected[name]));
    });
  }

  it('the memo is filled by builds that are given one, and only by those', () => {
    const own = createFlagsMemo();
    buildFlags(year);
    expect(own.quality.sessions.size).toBe(0);
    buildFlags(year, DEFAULT_THRESHOLDS, { memo: own });
    expect(own.quality.sessions.size).toBe(year.sessions.length);
  });

  it('chart evidence says where each baseline came from (first values here: no reference period is set)', () => {
    const drift = buildFlags(year).filter((f) => f.kind === 'drift');
    expect(drift.length).toBeGreaterThan(0);
    for (const f of drift) expect((f.evidence.baseline as { source: string }).source).toBe('first-values');
  });

  it('the pinned year exercises rating checks, charts and pooled tests', () => {
    const kinds = new Set((expected.year as { kind: string }[]).map((f) => f.kind));
    for (const kind of ['drift', 'lenient', 'inconsistent', 'unstable-product', 'missing-cells', 'straight-lining']) expect(kinds).toContain(kind);
  });

  it('a history whose ratings differ in one value gets its own data-quality result (memo keyed by content)', () => {
    const changed = equalityYear();
    const target = changed.sessions[50].label;
    let done = false;
    changed.ratings = changed.ratings!.map((r) => {
      if (done || r.session !== target || r.assessor !== 'A08' || r.attribute !== 'attr1') return r;
      done = true;
      return { ...r, value: 9 };
    });
    const before = buildFlags(year, DEFAULT_THRESHOLDS, { memo }).filter((f) => f.kind === 'straight-lining' && f.firstSession === target);
    const after = buildFlags(changed, DEFAULT_THRESHOLDS, { memo }).filter((f) => f.kind === 'straight-lining' && f.firstSession === target);
    expect(asJson(after)).toEqual(asJson(buildFlags(changed).filter((f) => f.kind === 'straight-lining' && f.firstSession === target)));
    expect(before.length).toBe(1);
    expect(asJson(after)).not.toEqual(asJson(before));
  });
});
