/** The shared words and formats of the pages (report/words.ts). Common practice, no source. */
import { describe, expect, it } from 'vitest';
import { FLAG_KINDS } from '../../domain/flags.js';
import { formatP, KIND_LABELS, localTime, plural, readable } from '../../report/words.js';

describe('words', () => {
  it('labels every flag kind in words about the ratings', () => {
    for (const kind of FLAG_KINDS) expect(KIND_LABELS[kind]).toMatch(/^[a-z]/);
    expect(KIND_LABELS.lenient).toBe('level above the panel');
    expect(KIND_LABELS.harsh).toBe('level below the panel');
    expect(KIND_LABELS.inconsistent).toBe('wide replicate spread');
    expect(KIND_LABELS['non-discriminating']).toBe('weak product separation');
  });

  it('formats p-values one way', () => {
    expect(formatP(0.0031)).toBe('p = 0.003');
    expect(formatP(0.00042)).toBe('p < 0.001');
    expect(formatP(0.042)).toBe('p = 0.04');
    expect(formatP(0.5)).toBe('p = 0.50');
    expect(formatP(null)).toBe('—');
    expect(formatP(0.012, 'q')).toBe('q = 0.01');
  });

  it('says plurals right, rounds for reading and shows local times', () => {
    expect(plural(1, 'session')).toBe('1 session');
    expect(plural(2, 'flag')).toBe('2 flags');
    expect(readable(-0.0001)).toBe('0.00');
    expect(readable(12.345)).toBe('12.3');
    expect(localTime('2026-12-04T15:40:00Z')).toMatch(/^4 Dec 2026, \d\d:40$/);
  });
});
