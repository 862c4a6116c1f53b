import { describe, expect, it } from 'vitest';
import type { Flag } from '../../domain/flags.js';
import { generatePanel } from '../../demo/generate-panel.js';
import { flagFindsFault, median, scorePanel } from './scoring.js';

const panel = generatePanel({
  seed: 5,
  nWeeks: 10,
  nAssessors: 10,
  startDate: '2026-01-05',
  faults: [
    { kind: 'lenient', assessor: 'A01' },
    { kind: 'reversed', assessor: 'A02', attributes: ['sweetness', 'thickness'] },
    { kind: 'swapped-codes', assessor: 'A03', fromSession: 4, product: 'REF', otherProduct: 'T02' },
    { kind: 'unstable-product', product: 'T01', attributes: ['sourness'] },
  ],
});
const [lenient, reversed, swapped, unstable] = panel.truth;

function flag(partial: Partial<Flag> & Pick<Flag, 'kind'>): Flag {
  return {
    assessor: null,
    product: null,
    attribute: null,
    firstSession: 'S01',
    severity: 'watch',
    evidence: { test: 'test', n: 1, threshold: 't' },
    message: 'm',
    ...partial,
  };
}

describe('flagFindsFault', () => {
  it('needs the same kind and assessor; an assessor-wide flag matches any attribute', () => {
    expect(flagFindsFault(flag({ kind: 'lenient', assessor: 'A01' }), lenient)).toBe(true);
    expect(flagFindsFault(flag({ kind: 'lenient', assessor: 'A01', attribute: 'sweetness' }), lenient)).toBe(true);
    expect(flagFindsFault(flag({ kind: 'harsh', assessor: 'A01' }), lenient)).toBe(false);
    expect(flagFindsFault(flag({ kind: 'lenient', assessor: 'A02' }), lenient)).toBe(false);
  });

  it('a per-attribute flag must name a planted attribute', () => {
    expect(flagFindsFault(flag({ kind: 'reversed', assessor: 'A02', attribute: 'thickness' }), reversed)).toBe(true);
    expect(flagFindsFault(flag({ kind: 'reversed', assessor: 'A02', attribute: 'sourness' }), reversed)).toBe(false);
  });

  it('one-session faults need the session; swapped codes match either product', () => {
    expect(flagFindsFault(flag({ kind: 'swapped-codes', assessor: 'A03', product: 'T02', firstSession: 'S05' }), swapped)).toBe(true);
    expect(flagFindsFault(flag({ kind: 'swapped-codes', assessor: 'A03', product: 'REF', firstSession: 'S05' }), swapped)).toBe(true);
    expect(flagFindsFault(flag({ kind: 'swapped-codes', assessor: 'A03', product: 'T03', firstSession: 'S05' }), swapped)).toBe(false);
    const withProducts = (products: string[]) => ({ test: 'swap', n: 10, threshold: 't', products });
    expect(flagFindsFault(flag({ kind: 'swapped-codes', assessor: 'A03', product: 'T07', evidence: withProducts(['T07', 'T02']), firstSession: 'S05' }), swapped)).toBe(true);
    expect(flagFindsFault(flag({ kind: 'swapped-codes', assessor: 'A03', product: 'T03', evidence: withProducts(['T03', 'T04']), firstSession: 'S05' }), swapped)).toBe(false);
    expect(flagFindsFault(flag({ kind: 'swapped-codes', assessor: 'A03', product: 'T02', firstSession: 'S06' }), swapped)).toBe(false);
  });

  it('an unstable product needs a flag naming that product', () => {
    expect(flagFindsFault(flag({ kind: 'unstable-product', product: 'T01', attribute: 'sourness', firstSession: 'S06' }), unstable)).toBe(true);
    expect(flagFindsFault(flag({ kind: 'unstable-product', product: 'T02', attribute: 'sourness' }), unstable)).toBe(false);
    // The period model's product:session test names the attribute only.
    expect(flagFindsFault(flag({ kind: 'unstable-product', attribute: 'sourness' }), unstable)).toBe(true);
    expect(flagFindsFault(flag({ kind: 'unstable-product', attribute: 'sweetness' }), unstable)).toBe(false);
    expect(flagFindsFault(flag({ kind: 'unstable-product' }), unstable)).toBe(false);
  });
});

describe('scorePanel', () => {
  it('counts found faults per kind and act flags on clean assessors per clean assessor-year', () => {
    const flags = [
      flag({ kind: 'lenient', assessor: 'A01', severity: 'act' }),
      flag({ kind: 'reversed', assessor: 'A02', attribute: 'sweetness' }),
      flag({ kind: 'drift', assessor: 'A09', severity: 'act' }),
      flag({ kind: 'harsh', assessor: 'A10' }),
      flag({ kind: 'unstable-product', product: 'T03', severity: 'act' }),
    ];
    const score = scorePanel(flags, panel.truth, ['A09', 'A10'], 52, 'p');
    expect(score.byKind.get('lenient')).toMatchObject({ planted: 1, found: 1, foundAct: 1 });
    expect(score.byKind.get('reversed')).toMatchObject({ planted: 1, found: 1, foundAct: 0 });
    expect(score.byKind.get('swapped-codes')).toMatchObject({ planted: 1, found: 0 });
    expect(score.cleanActFlags.map((f) => f.assessor)).toEqual(['A09']);
    expect(score.cleanWatchFlags.map((f) => f.assessor)).toEqual(['A10']);
    expect(score.cleanAssessorYears).toBe(2);
    expect(score.stableProductActFlags.map((f) => f.product)).toEqual(['T03']);
  });

  it('median of odd and even lists', () => {
    expect(median([3, 1, 2])).toBe(2);
    expect(median([4, 1, 2, 3])).toBe(2.5);
    expect(median([])).toBeNull();
  });
});
