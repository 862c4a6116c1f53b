/** The shared level coder: first-seen dense codes, the reserved code 0, the fresh list. */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { LevelCoder } from '../../domain/level-coder.js';

describe('LevelCoder', () => {
  it('codes values 0, 1, 2, … in first-seen order, whatever repeats and alternations come', () => {
    fc.assert(
      fc.property(fc.array(fc.constantFrom('a', 'b', 'c', 'd', '', 'e'), { maxLength: 60 }), (values) => {
        const coder = new LevelCoder<string>();
        const codes = values.map((value) => coder.code(value));
        const firstSeen = [...new Set(values)];
        expect(codes).toEqual(values.map((value) => firstSeen.indexOf(value)));
        expect(coder.names).toEqual(firstSeen);
        expect(coder.size).toBe(firstSeen.length);
      }),
      { numRuns: 300, seed: 20261204 },
    );
  });

  it('keeps code 0 for the reserved value, which is never a level', () => {
    const coder = new LevelCoder<string>('');
    expect(coder.code('x')).toBe(1);
    expect(coder.code('')).toBe(2);
    expect(coder.code('x')).toBe(1);
    expect(coder.names).toEqual(['', 'x', '']);
    expect(coder.find('y')).toBeUndefined();
  });

  it('hands on the values first coded since the last call, and codeAll rebuilds the same codes elsewhere', () => {
    const reader = new LevelCoder<string>('');
    const store = new LevelCoder<string>('');
    for (const batch of [['p', 'q', 'p'], ['q', 'r'], ['s', 'p']]) {
      const ids = batch.map((value) => reader.code(value));
      store.codeAll(reader.takeFresh());
      expect(ids.map((id) => store.names[id])).toEqual(batch);
    }
    expect(reader.takeFresh()).toEqual([]);
  });

  it('codes numbers and strings apart', () => {
    const coder = new LevelCoder<string | number>();
    expect([coder.code(1), coder.code('1'), coder.code(1)]).toEqual([0, 1, 0]);
  });
});
