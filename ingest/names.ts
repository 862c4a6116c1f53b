/**
 * Names people give things (panel, session, assessor, product, attribute). Two names that look
 * the same must be the same name, and a name must be reachable from its own links:
 * - Unicode NFC: "é" typed as one character or as "e" + combining accent is one assessor.
 * - Refused: control characters, invisible format characters (zero-width space and joiners,
 *   word joiner, byte-order mark, soft hyphen, …) and bidirectional controls (embeddings,
 *   overrides, isolates, marks), which make two different names look alike or reorder what a
 *   page shows; line and paragraph separators.
 * - Refused: "." and ".." and names made only of punctuation (and spaces), which address
 *   paths rather than name anything.
 */

export type NameCheck = { ok: true; name: string } | { ok: false; reason: string };

/** Cc (controls), Cf (format: zero-width, bidi, BOM, soft hyphen, …), Zl, Zp. */
const HIDDEN = /[\p{Cc}\p{Cf}\p{Zl}\p{Zp}]/u;
const ONLY_PUNCTUATION = /^[\p{P}\p{Z}]+$/u;
const NOT_ASCII = /[^\x20-\x7e]/;
/** Printable ASCII with a letter or digit: the common case, checked without Unicode work. */
const ASCII_WORDY = /[A-Za-z0-9]/;

const CHARACTER_NAMES: Record<number, string> = {
  0x00ad: 'soft hyphen',
  0x200b: 'zero-width space',
  0x200c: 'zero-width non-joiner',
  0x200d: 'zero-width joiner',
  0x200e: 'left-to-right mark',
  0x200f: 'right-to-left mark',
  0x2028: 'line separator',
  0x2029: 'paragraph separator',
  0x202a: 'left-to-right embedding',
  0x202b: 'right-to-left embedding',
  0x202c: 'pop directional formatting',
  0x202d: 'left-to-right override',
  0x202e: 'right-to-left override',
  0x2060: 'word joiner',
  0x2066: 'left-to-right isolate',
  0x2067: 'right-to-left isolate',
  0x2068: 'first strong isolate',
  0x2069: 'pop directional isolate',
  0xfeff: 'zero-width no-break space (byte-order mark)',
  0x09: 'tab',
  0x0a: 'line feed',
  0x0d: 'carriage return',
};

/** "U+200B (zero-width space)". */
export function describeCharacter(codePoint: number): string {
  const hex = codePoint.toString(16).toUpperCase().padStart(4, '0');
  const name = CHARACTER_NAMES[codePoint];
  return name ? `U+${hex} (${name})` : `U+${hex}`;
}

/** The text with every hidden character shown as [U+XXXX], for messages and pages. */
export function showHidden(text: string): string {
  return text.replace(new RegExp(HIDDEN.source, 'gu'), (c) => `[U+${c.codePointAt(0)!.toString(16).toUpperCase().padStart(4, '0')}]`);
}

/** Checks and normalises one name (already trimmed); `what` is "assessor", "panel name", … */
export function checkName(text: string, what: string): NameCheck {
  if (!NOT_ASCII.test(text)) {
    if (ASCII_WORDY.test(text) || text === '') return { ok: true, name: text };
  } else {
    const hidden = HIDDEN.exec(text);
    if (hidden !== null) {
      return {
        ok: false,
        reason: `The ${what} "${showHidden(text)}" contains ${describeCharacter(hidden[0].codePointAt(0)!)}, a control or invisible character that makes names look alike; retype it without that character.`,
      };
    }
  }
  if (ONLY_PUNCTUATION.test(text)) {
    return { ok: false, reason: `The ${what} "${text}" is only punctuation; give it a name with letters or digits.` };
  }
  return { ok: true, name: text.normalize('NFC') };
}
