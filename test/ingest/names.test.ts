/**
 * Names (session, assessor, product, attribute, panel): NFC-normalised; control, invisible and
 * bidi characters refused with file, row and column; "." / ".." / punctuation-only refused.
 * Session dates more than a year after the caller's today: a finding, not a rejection.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { checkName } from '../../ingest/names.js';
import { oneYearAfter } from '../../ingest/read-ratings.js';
import { readText, where } from './helpers.js';

const HEADER = 'session,date,assessor,product,replicate,attribute,value';
/** The characters the attack run used and their neighbours: zero-width, joiners, BOM, soft hyphen, bidi. */
const HIDDEN = [
  '\u200b', '\u200c', '\u200d', '\u2060', '\ufeff', '\u00ad',
  '\u202a', '\u202b', '\u202c', '\u202d', '\u202e', '\u2066', '\u2067', '\u2068', '\u2069', '\u200e', '\u200f',
  '\u0000', '\u0007', '\u001b', '\u007f', '\u0085', '\u2028', '\u2029',
];

describe('checkName', () => {
  it('refuses each hidden character, naming it', () => {
    for (const c of HIDDEN) {
      const check = checkName(`A${c}01`, 'assessor');
      expect(check.ok, `U+${c.codePointAt(0)!.toString(16)}`).toBe(false);
    }
    expect(checkName('A\u200b01', 'assessor')).toEqual({
      ok: false,
      reason: 'The assessor "A[U+200B]01" contains U+200B (zero-width space), a control or invisible character that makes names look alike; retype it without that character.',
    });
    expect(checkName('X\u202eY', 'product')).toMatchObject({ ok: false, reason: expect.stringContaining('U+202E (right-to-left override)') });
  });

  it('refuses "." and ".." and punctuation-only names; keeps ordinary ones', () => {
    for (const bad of ['.', '..', '...', '-', '. .', '¿?', '/', '\\', '«»']) expect(checkName(bad, 'panel name').ok, bad).toBe(false);
    for (const good of ['A01', 'S.01', '.5 sugar', 'Zoé', 'crème brûlée', 'P+', '+', '日本', 'ø', 'A-1']) expect(checkName(good, 'product')).toEqual({ ok: true, name: good.normalize('NFC') });
  });

  it('NFC and NFD of a name give one name', () => {
    expect(checkName('Zoe\u0301', 'assessor')).toEqual({ ok: true, name: 'Zo\u00e9' });
  });
});

describe('names in files', () => {
  it('refuses a hidden character with file, row and column, and shows it in the value', async () => {
    const r = await readText(`${HEADER}\nS1,2026-01-05,A01,P1,1,sweet,4\nS1,2026-01-05,A\u200b01,P1,1,sweet,5\nS1,2026-01-05,A02,P\u202e1,1,sweet,5\n`, { fileName: 'w.csv' });
    expect(where(r.problems)).toEqual([
      [3, 'assessor', 'name-invalid'],
      [4, 'product', 'name-invalid'],
    ]);
    expect(r.problems[0]).toMatchObject({ file: 'w.csv', value: 'A[U+200B]01' });
    expect(r.ratings.map((x) => x.assessor)).toEqual(['A01']);
  });

  it('refuses "." and ".." as session, assessor, product or attribute', async () => {
    const r = await readText(`${HEADER}\n.,2026-01-05,A01,P1,1,sweet,4\nS1,2026-01-05,..,P1,1,sweet,4\nS1,2026-01-05,A01,-,1,sweet,4\nS1,2026-01-05,A01,P1,1,...,4\n`);
    expect(where(r.problems)).toEqual([
      [2, 'session', 'name-invalid'],
      [3, 'assessor', 'name-invalid'],
      [4, 'product', 'name-invalid'],
      [5, 'attribute', 'name-invalid'],
    ]);
  });

  it('refuses a hidden character in a wide-form attribute header', async () => {
    const r = await readText('session,date,assessor,product,replicate,sweet\u200d,sour\nS1,2026-01-05,A01,P1,1,4,5\n');
    expect(r.problems).toEqual([expect.objectContaining({ code: 'name-invalid', row: 1, column: 'sweet[U+200D]' })]);
    expect(r.ratings).toEqual([]);
  });

  it('property: a hidden character inserted anywhere in a name is always refused, at its row and column', async () => {
    const name = fc.stringMatching(/^[A-Za-z][A-Za-z0-9 éü]{0,10}$/);
    await fc.assert(
      fc.asyncProperty(name, fc.constantFrom(...HIDDEN.filter((c) => c !== '\u0000')), fc.nat(), fc.constantFrom('session', 'assessor', 'product', 'attribute'), async (base, hidden, at, role) => {
        const position = at % (base.length + 1);
        const bad = base.slice(0, position) + hidden + base.slice(position);
        const cells: Record<string, string> = { session: 'S1', date: '2026-01-05', assessor: 'A01', product: 'P1', replicate: '1', attribute: 'sweet', value: '4' };
        cells[role] = `"${bad.replace(/"/g, '""')}"`;
        const line = HEADER.split(',').map((h) => cells[h]).join(',');
        const r = await readText(`${HEADER}\nS1,2026-01-05,A01,P1,1,sweet,4\n${line}\n`);
        if (!bad.trim().includes(hidden)) {
          // White space by JavaScript's rules (BOM, line/paragraph separators) at either end is
          // trimmed like a space: the name read is the name without it, not a look-alike.
          expect(r.problems).toEqual([]);
          expect(r.ratings[1][role === 'session' ? 'session' : role]).toBe(bad.trim().normalize('NFC'));
        } else {
          expect(where(r.problems)).toEqual([[3, role, 'name-invalid']]);
        }
      }),
      { numRuns: 200 },
    );
  });

  it('property: NFC and NFD spellings of a name map to one assessor (and product)', async () => {
    const accented = fc.array(fc.constantFrom('a', 'e', 'é', 'è', 'ü', 'ñ', 'ç', 'Å', 'ö', 'z'), { minLength: 1, maxLength: 8 }).map((xs) => `A${xs.join('')}`);
    await fc.assert(
      fc.asyncProperty(accented, async (base) => {
        const nfc = base.normalize('NFC');
        const nfd = base.normalize('NFD');
        const r = await readText(`${HEADER}\nS1,2026-01-05,${nfc},${nfd},1,sweet,4\nS1,2026-01-05,${nfd},${nfc},2,sweet,5\n`);
        expect(r.problems).toEqual([]);
        expect(new Set(r.ratings.map((x) => x.assessor))).toEqual(new Set([nfc]));
        expect(new Set(r.ratings.map((x) => x.product))).toEqual(new Set([nfc]));
      }),
      { numRuns: 100 },
    );
  });
});

describe('dates far in the future', () => {
  it('a date more than a year after today is a finding (once per date), not a rejection', async () => {
    const text = `${HEADER}\nS1,2027-12-04,A01,P1,1,sweet,4\nS2,2027-12-05,A01,P1,1,sweet,4\nS2,2027-12-05,A02,P1,1,sweet,5\nS3,2086-01-05,A01,P1,1,sweet,4\n`;
    const r = await readText(text, { fileName: 'w.csv', today: '2026-12-04' });
    expect(r.problems).toEqual([]);
    expect(r.ratings).toHaveLength(4);
    expect(r.findings.map((f) => [f.code, f.row, f.column, f.session])).toEqual([
      ['future-date', 3, 'date', 'S2'],
      ['future-date', 5, 'date', 'S3'],
    ]);
    expect(r.findings[0].message).toBe('The session date 2027-12-05 is more than a year after today; check the year (the ratings were read as dated).');
    // No clock in the reader: without today, no finding.
    expect((await readText(text)).findings).toEqual([]);
  });

  it('a year after 29 February is 1 March', () => {
    expect(oneYearAfter('2028-02-29')).toBe('2029-03-01');
    expect(oneYearAfter('2026-12-04')).toBe('2027-12-04');
  });
});
