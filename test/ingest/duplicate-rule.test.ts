/** The duplicate rule of methods §5.4, shared by the import and `analyze`. */
import { describe, expect, it } from 'vitest';
import { classifyRepeat } from '../../ingest/duplicate-rule.js';

describe('classifyRepeat', () => {
  it('an exact repeat needs the same value and the same sample code', () => {
    expect(classifyRepeat({ value: 5 }, { value: 5 })).toBe('exact-repeat');
    expect(classifyRepeat({ value: 5, code: 'C1' }, { value: 5, code: 'C1' })).toBe('exact-repeat');
    expect(classifyRepeat({ value: 5 }, { value: 5.5 })).toBe('conflict');
    expect(classifyRepeat({ value: 5, code: 'C1' }, { value: 5, code: 'C2' })).toBe('conflict');
    expect(classifyRepeat({ value: 5, code: 'C1' }, { value: 5, code: null })).toBe('conflict');
  });

  it('treats no code, null and the import id 0 alike', () => {
    expect(classifyRepeat({ value: 5, code: null }, { value: 5 })).toBe('exact-repeat');
    expect(classifyRepeat({ value: 5, code: 0 }, { value: 5, code: null })).toBe('exact-repeat');
    expect(classifyRepeat({ value: 5, code: 3 }, { value: 5, code: 3 })).toBe('exact-repeat');
    expect(classifyRepeat({ value: 5, code: 3 }, { value: 5, code: 4 })).toBe('conflict');
  });
});
