/**
 * Spreadsheet formula neutralisation for CSV downloads, and its inverse for imports.
 *
 * A spreadsheet opening a CSV runs a cell that starts with = + - @ (and, in some
 * programs, tab or carriage return) as a formula. Export prefixes such text with an
 * apostrophe, which spreadsheets show as plain text; import strips exactly that prefix
 * so that import reads back what export wrote (restoreFormulaText(neutralizeFormulaText(s)) === s
 * for every string s).
 */

const APOSTROPHE = 39; // '

/** True for the characters a spreadsheet treats as the start of a formula. */
function isFormulaTrigger(charCode: number): boolean {
  return (
    charCode === 61 /* = */ ||
    charCode === 43 /* + */ ||
    charCode === 45 /* - */ ||
    charCode === 64 /* @ */ ||
    charCode === 9 /* tab */ ||
    charCode === 13 /* CR */
  );
}

/**
 * Prefix text that a spreadsheet would run as a formula with an apostrophe.
 * Text that already looks like a neutralised cell (apostrophe + trigger) is prefixed too,
 * so that the round trip through restoreFormulaText is exact.
 */
export function neutralizeFormulaText(text: string): string {
  if (text.length === 0) return text;
  const first = text.charCodeAt(0);
  if (isFormulaTrigger(first)) return "'" + text;
  if (first === APOSTROPHE && text.length > 1 && (isFormulaTrigger(text.charCodeAt(1)) || text.charCodeAt(1) === APOSTROPHE)) {
    return "'" + text;
  }
  return text;
}

/** Strip the apostrophe that neutralizeFormulaText added (inverse of it on every string). */
export function restoreFormulaText(text: string): string {
  if (text.length < 2 || text.charCodeAt(0) !== APOSTROPHE) return text;
  const second = text.charCodeAt(1);
  if (isFormulaTrigger(second)) return text.slice(1);
  // "''x…" was written for an original "'x…" whose second character needed protection.
  if (second === APOSTROPHE && text.length > 2 && (isFormulaTrigger(text.charCodeAt(2)) || text.charCodeAt(2) === APOSTROPHE)) {
    return text.slice(1);
  }
  return text;
}
