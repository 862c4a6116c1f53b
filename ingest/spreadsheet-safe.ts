/**
 * Spreadsheet formula neutralisation for CSV downloads, and its inverse for imports.
 *
 * A spreadsheet opening a CSV runs a cell that starts with = + - @ (and, in some
 * programs, tab or carriage return) as a formula. Export prefixes such text with an
 * apostrophe, which spreadsheets show as plain text; import strips exactly that prefix
 * so that import reads back what export wrote (restoreFormulaText(neutralizeFormulaText(s)) === s
 * for every string s).
 *
 * The same applies at the start of every line inside a cell (after each CR or LF): a reader
 * that splits the file into lines, or a program that mishandles a quoted line break, would
 * otherwise see a line beginning with `=cmd…`.
 */

const APOSTROPHE = 39; // '
const LF = 10;
const CR = 13;

/** True for the characters a spreadsheet treats as the start of a formula. */
function isFormulaTrigger(charCode: number): boolean {
  return (
    charCode === 61 /* = */ ||
    charCode === 43 /* + */ ||
    charCode === 45 /* - */ ||
    charCode === 64 /* @ */ ||
    charCode === 9 /* tab */ ||
    charCode === CR
  );
}

function isProtectedAfterApostrophe(charCode: number): boolean {
  return isFormulaTrigger(charCode) || charCode === APOSTROPHE;
}

/**
 * Whether a line starting at `at` gets an apostrophe: it starts with a formula character, or it
 * already looks like a neutralised line (apostrophe + formula character or apostrophe), so that
 * the round trip through restoreFormulaText is exact.
 */
function needsPrefix(text: string, at: number): boolean {
  if (at >= text.length) return false;
  const first = text.charCodeAt(at);
  if (isFormulaTrigger(first)) return true;
  return first === APOSTROPHE && at + 1 < text.length && isProtectedAfterApostrophe(text.charCodeAt(at + 1));
}

/** Whether the apostrophe at `at` (the start of a line) was added by neutralizeFormulaText. */
function isAddedPrefix(text: string, at: number): boolean {
  if (at + 1 >= text.length || text.charCodeAt(at) !== APOSTROPHE) return false;
  const second = text.charCodeAt(at + 1);
  if (isFormulaTrigger(second)) return true;
  // "''x…" was written for an original "'x…" whose second character needed protection.
  return second === APOSTROPHE && at + 2 < text.length && isProtectedAfterApostrophe(text.charCodeAt(at + 2));
}

function hasLineBreak(text: string): boolean {
  return text.indexOf('\n') !== -1 || text.indexOf('\r') !== -1;
}

/**
 * Prefix every line of the text (the start, and each position after a CR or LF) that a
 * spreadsheet would run as a formula with an apostrophe.
 */
export function neutralizeFormulaText(text: string): string {
  if (text.length === 0) return text;
  if (!hasLineBreak(text)) return needsPrefix(text, 0) ? "'" + text : text;
  let out = '';
  let lineStart = 0;
  for (let i = 0; i <= text.length; i++) {
    const code = i < text.length ? text.charCodeAt(i) : -1;
    if (code !== LF && code !== CR && code !== -1) continue;
    // A line runs from lineStart to i (the break itself included below).
    out += (needsPrefix(text, lineStart) ? "'" : '') + text.slice(lineStart, i + 1);
    lineStart = i + 1;
  }
  return out;
}

/** Strip the apostrophes that neutralizeFormulaText added (inverse of it on every string). */
export function restoreFormulaText(text: string): string {
  if (text.length < 2) return text;
  if (!hasLineBreak(text)) return isAddedPrefix(text, 0) ? text.slice(1) : text;
  let out = '';
  let lineStart = 0;
  for (let i = 0; i <= text.length; i++) {
    const code = i < text.length ? text.charCodeAt(i) : -1;
    if (code !== LF && code !== CR && code !== -1) continue;
    out += text.slice(isAddedPrefix(text, lineStart) ? lineStart + 1 : lineStart, i + 1);
    lineStart = i + 1;
  }
  return out;
}
