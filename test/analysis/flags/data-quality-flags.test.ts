/**
 * Data-quality flag kinds through buildFlags: planted in seeded ratings (or passed as import
 * findings, as the store hands them over) and absent on clean sessions.
 */
import { describe, expect, it } from 'vitest';
import type { Flag, FlagKind } from '../../../domain/flags.js';
import type { Rating } from '../../../domain/ratings.js';
import { buildFlags } from '../../../analysis/flags/build-flags.js';
import type { ImportFinding, PanelHistory } from '../../../analysis/monitor/series.js';
import { attributesOf, swapProducts, syntheticRatings } from './helpers/synthetic-ratings.js';

function historyOf(ratings: Rating[], importFindings: ImportFinding[] = [], scaleMax = 10): PanelHistory {
  const sessions = [...new Map(ratings.map((r) => [r.session, { label: r.session, date: r.date }])).values()];
  const attributes = attributesOf(8, scaleMax);
  return {
    sessions,
    attributes,
    referenceProducts: [],
    results: sessions.flatMap((s) =>
      attributes.map((a) => ({
        session: s.label,
        date: s.date,
        attribute: a.name,
        scaleMin: 0,
        scaleMax,
        fit: { session: s.label, attribute: a.name, model: 'session' as const, n: 0, assessors: 8, products: 6, variance: { assessor: 0, 'assessor:product': 0, residual: 1 }, remlCriterion: 0, productTest: { F: 50, numDf: 5, denDf: 35, p: 1e-8 }, productMeans: [], assessorEffects: [] },
        indices: [],
        productTestP: 1e-8,
      })),
    ),
    ratings,
    importFindings,
    events: [],
  };
}

const twoSessions = (seed: number, scaleMax = 10) => [
  ...syntheticRatings({ seed, session: 'S01', date: '2026-01-05', scaleMax }),
  ...syntheticRatings({ seed: seed + 100, session: 'S02', date: '2026-01-12', scaleMax }),
];

const only = (flags: Flag[], kind: FlagKind) => flags.filter((f) => f.kind === kind);

describe('clean sessions', () => {
  it('give no data-quality flags (4 seeds)', () => {
    for (const seed of [1, 2, 3, 4]) {
      expect(buildFlags(historyOf(twoSessions(seed))), `seed ${seed}`).toEqual([]);
      expect(buildFlags(historyOf(twoSessions(seed, 100), [], 100)), `seed ${seed}, 0–100`).toEqual([]);
    }
  });
});

describe('planted data-quality problems', () => {
  it('swapped-codes: watch, with both products and codes in the message', () => {
    const clean = twoSessions(2);
    const swapped = swapProducts(clean.filter((r) => r.session === 'S01'), 'A03', 1, 'P1', 'P4');
    const flags = buildFlags(historyOf([...swapped, ...clean.filter((r) => r.session === 'S02')]));
    const hit = only(flags, 'swapped-codes');
    expect(hit).toHaveLength(1);
    expect(hit[0]).toMatchObject({ assessor: 'A03', severity: 'watch', firstSession: 'S01', product: 'P1' });
    expect(hit[0].evidence.products).toEqual(['P1', 'P4']);
    expect(hit[0].message).toMatch(/^In session S01, A03's ratings of P1 and P4 \(codes \d{3} and \d{3}\), replicate 1, each matched/);
  });
  it('straight-lining: flat on 4 attributes → act, attribute null', () => {
    const ratings = twoSessions(3).map((r) => (r.session === 'S02' && r.assessor === 'A06' && Number(r.attribute.slice(4)) <= 4 ? { ...r, value: 6 } : r));
    const hit = only(buildFlags(historyOf(ratings)), 'straight-lining');
    expect(hit).toHaveLength(1);
    expect(hit[0]).toMatchObject({ assessor: 'A06', severity: 'act', firstSession: 'S02', attribute: null });
    expect(hit[0].evidence.sessionLevelAct).toBe(true);
  });
  it('missing-cells from ratings: 40 % removed → act', () => {
    const ratings = twoSessions(4).filter((r) => !(r.session === 'S01' && r.assessor === 'A02' && ['P1', 'P2', 'P3', 'P4'].includes(r.product)));
    const hit = only(buildFlags(historyOf(ratings)), 'missing-cells');
    expect(hit.map((f) => [f.assessor, f.severity, f.firstSession])).toEqual([['A02', 'act', 'S01']]);
  });
  it('decimal-shift in range on a 0–100 scale → watch', () => {
    const ratings = twoSessions(5, 100);
    const same = (r: Rating) => r.session === 'S02' && r.product === 'P2' && r.attribute === 'attr3';
    const others = ratings.filter((r) => same(r) && r.assessor !== 'A01').map((r) => r.value).sort((a, b) => a - b);
    const median = (others[others.length / 2 - 1] + others[others.length / 2]) / 2;
    const i = ratings.findIndex((r) => same(r) && r.assessor === 'A01' && r.replicate === 2);
    ratings[i] = { ...ratings[i], value: Math.round(median) / 10 };
    const hit = only(buildFlags(historyOf(ratings, [], 100)), 'decimal-shift');
    expect(hit).toHaveLength(1);
    expect(hit[0]).toMatchObject({ assessor: 'A01', product: 'P2', attribute: 'attr3', severity: 'watch', firstSession: 'S02' });
  });
  it('scale-end clipping is reported under scale-expansion with the test named', () => {
    const ratings = twoSessions(6).map((r) => (r.session === 'S01' && r.assessor === 'A08' ? { ...r, value: r.value >= 5 ? 10 : 0 } : r));
    const hit = only(buildFlags(historyOf(ratings)), 'scale-expansion');
    expect(hit).toHaveLength(1);
    expect(hit[0].evidence.test).toMatch(/clipping/);
    expect(hit[0]).toMatchObject({ assessor: 'A08', severity: 'act' });
  });
  it('import findings become out-of-scale, decimal-shift, duplicate and missing-cells flags, grouped per assessor and session', () => {
    const findings: ImportFinding[] = [
      { code: 'out-of-scale', file: 'week2.csv', row: 14, column: 'value', message: 'Value 12 is above the scale maximum 10.', session: 'S02', assessor: 'A04', product: 'P2', attribute: 'attr1' },
      { code: 'decimal-shift', file: 'week2.csv', row: 20, column: 'value', message: 'Value 65 looks like 6.5.', session: 'S02', assessor: 'A05', product: 'P3', attribute: 'attr2' },
      { code: 'duplicate-row', file: 'week2.csv', row: 30, column: null, message: 'Row repeats row 29.', session: 'S02', assessor: 'A01', product: 'P1', attribute: 'attr1' },
      { code: 'duplicate-row', file: 'week2.csv', row: 31, column: null, message: 'Row repeats row 28.', session: 'S02', assessor: 'A01', product: 'P1', attribute: 'attr2' },
      { code: 'conflicting-duplicate', file: 'week2.csv', row: 40, column: null, message: 'Two different values.', session: 'S02', assessor: 'A02', product: 'P1', attribute: 'attr1' },
      { code: 'identifier-case', file: 'week2.csv', row: 2, column: 'assessor', message: 'a01 vs A01', session: 'S02' },
      { code: 'missing-cells', file: 'week1.csv', row: null, column: null, message: 'A07 rated 40 of 96 cells.', session: 'S01', assessor: 'A07' },
    ];
    // A07's S01 ratings are also thinned, so the rating-based check would find them: the import
    // finding is used instead, not both.
    const ratings = twoSessions(7).filter((r) => !(r.session === 'S01' && r.assessor === 'A07' && r.product !== 'P1'));
    const flags = buildFlags(historyOf(ratings, findings));
    expect(flags.map((f) => [f.kind, f.severity, f.assessor, f.product, f.attribute])).toEqual([
      ['decimal-shift', 'act', 'A05', 'P3', 'attr2'],
      ['duplicate', 'act', 'A02', 'P1', 'attr1'],
      ['out-of-scale', 'act', 'A04', 'P2', 'attr1'],
      ['duplicate', 'watch', 'A01', 'P1', null],
      ['missing-cells', 'watch', 'A07', null, null],
    ]);
    expect(flags[4].firstSession).toBe('S01');
    expect(flags[3].evidence.n).toBe(2);
    expect(flags[3].evidence.rows).toEqual([30, 31]);
    expect(flags[3].message).toBe("In session S02, A01's ratings contained 2 findings of a row repeated with the same value (spreadsheet rows 30, 31).");
  });
});
