/**
 * Related cases on one assessor shown as one: a drift across attributes and the lenient level
 * across attributes that it led to are one case with both pieces of evidence; cases on different
 * attributes, of unrelated kinds, or about the whole panel stay apart.
 */
import { describe, expect, it } from 'vitest';
import type { FlagKind } from '../../domain/flags.js';
import { foldRelated, type CaseSummary } from '../../monitor/cases.js';

let nextId = 1;
function summary(kind: FlagKind, severity: 'act' | 'watch', assessor: string | null, attribute: string | null): CaseSummary {
  return {
    id: nextId++, href: '', kind, kindLabel: kind, severity, status: 'open', isCurrent: true, assessor, assessorHref: null,
    attribute, product: null, scope: '', message: '', effect: '', effectValue: 0, detectedSession: 'S1', updatedSession: 'S1',
    evidence: [], lastNote: null, related: [],
  };
}

describe('foldRelated', () => {
  it('folds a drift and a level case across attributes of one assessor, the level case leading', () => {
    const drift = summary('drift', 'act', 'A07', null);
    const lenient = summary('lenient', 'act', 'A07', null);
    const folded = foldRelated([drift, lenient]);
    expect(folded).toHaveLength(1);
    expect(folded[0].id).toBe(lenient.id);
    expect(folded[0].related.map((c) => c.id)).toEqual([drift.id]);
  });

  it('keeps apart other attributes, other families, other assessors and whole-panel cases', () => {
    const cases = [
      summary('lenient', 'act', 'A01', 'sweet'),
      summary('harsh', 'watch', 'A01', 'sour'),
      summary('inconsistent', 'act', 'A01', 'sweet'),
      summary('drift', 'watch', 'A02', null),
      summary('unstable-product', 'act', null, 'sweet'),
    ];
    const folded = foldRelated(cases);
    expect(folded).toHaveLength(5);
    expect(folded.every((c) => c.related.length === 0)).toBe(true);
  });

  it('puts an act case before a watch case of the same family', () => {
    const watchLevel = summary('harsh', 'watch', 'A03', 'salt');
    const actDrift = summary('drift', 'act', 'A03', 'salt');
    const [lead] = foldRelated([watchLevel, actDrift]);
    expect(lead.id).toBe(actDrift.id);
    expect(lead.related.map((c) => c.id)).toEqual([watchLevel.id]);
  });
});
