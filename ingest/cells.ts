/**
 * Cell readers for the key and value columns. Each returns the parsed value or a
 * reason (problem code + sentence); none of them throws.
 *
 * Decimal marks (the rule, and why):
 * - The file's delimiter tells the locale. A semicolon-separated file comes from a locale
 *   whose decimal mark is the comma (that is why the semicolon is used), so there the comma
 *   is the decimal mark; a comma- or tab-separated file (and text cells in .xlsx) uses the dot.
 * - The other mark is also accepted as a decimal mark (mixed exports are common), except
 *   when the number has the shape of a thousands group: a non-zero integer part of 1 to 3
 *   digits followed by exactly 3 digits ("1,500" in a comma file, "1.500" in a semicolon
 *   file). That text means 1500 in some locales and 1.5 in others, so it is refused with a
 *   sentence asking for an unambiguous spelling, never guessed.
 * - Numbers with more than one mark ("1,234.5", "1.234,5") are refused: ratings never need
 *   thousands separators.
 */

export type DecimalMark = '.' | ',';

export type CellResult<T> = { ok: true; value: T } | { ok: false; code: CellProblemCode; message: string };
export type CellProblemCode = 'not-a-number' | 'not-finite' | 'replicate-not-positive-integer' | 'invalid-date';

const PLAIN_NUMBER = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;
const ONE_MARK = /^([+-]?\d*)([.,])(\d+)(?:[eE][+-]?\d+)?$/;
const THOUSANDS_SHAPE = /^[+-]?[1-9]\d{0,2}[.,]\d{3}$/;
const NON_FINITE_WORD = /^[+-]?(?:nan|inf|infinity|∞)$/i;

/**
 * Read a rating value (text already trimmed, not empty). Returns a finite number.
 * @example parseRatingValue('4,5', ',') → { ok: true, value: 4.5 }
 */
export function parseRatingValue(text: string, decimalMark: DecimalMark): CellResult<number> {
  if (PLAIN_NUMBER.test(text) && (decimalMark === '.' || !THOUSANDS_SHAPE.test(text))) {
    return finite(Number(text), text);
  }
  const match = ONE_MARK.exec(text);
  if (match !== null) {
    if (match[2] !== decimalMark && THOUSANDS_SHAPE.test(text)) {
      const other = match[2] === ',' ? 'comma' : 'dot';
      return {
        ok: false,
        code: 'not-a-number',
        message: `"${text}" is ambiguous: the ${other} could be a decimal mark or a thousands separator. Write it without a thousands separator (e.g. ${match[1]}${match[3]}) or with the file's decimal mark (${match[1]}${decimalMark}${match[3]}).`,
      };
    }
    return finite(Number(text.replace(',', '.')), text);
  }
  if (NON_FINITE_WORD.test(text)) {
    return { ok: false, code: 'not-finite', message: `"${text}" is not a finite number; give the rating as a number or leave the cell empty if it is missing.` };
  }
  return { ok: false, code: 'not-a-number', message: `"${text}" is not a number; give the rating as a number such as 4.5 (no units, no thousands separators).` };
}

function finite(value: number, text: string): CellResult<number> {
  if (Number.isFinite(value)) return { ok: true, value };
  return { ok: false, code: 'not-finite', message: `"${text}" is too large to be a rating (it does not fit a finite number).` };
}

const POSITIVE_INTEGER = /^\+?0*([1-9]\d{0,8})(?:[.,]0+)?$/;

/** Read a replicate: a positive whole number (1, 2, …); "2.0" is accepted as 2. */
export function parseReplicate(text: string): CellResult<number> {
  const match = POSITIVE_INTEGER.exec(text);
  if (match !== null) return { ok: true, value: Number(match[1]) };
  return {
    ok: false,
    code: 'replicate-not-positive-integer',
    message: `Replicate "${text}" is not a positive whole number; replicates are numbered 1, 2, 3, …`,
  };
}

const ISO_DATE = /^(\d{4})-(\d{2})-(\d{2})(?:[T ]00:00(?::00(?:\.0+)?)?Z?)?$/;
const DOTTED_DATE = /^(\d{1,2})\.(\d{1,2})\.(\d{4})$/;
const SLASHED_DATE = /^\d{1,4}\/\d{1,2}\/\d{1,4}$/;

function daysInMonth(year: number, month: number): number {
  if (month === 2) return (year % 4 === 0 && year % 100 !== 0) || year % 400 === 0 ? 29 : 28;
  return month === 4 || month === 6 || month === 9 || month === 11 ? 30 : 31;
}

function pad2(n: number): string {
  return n < 10 ? '0' + n : String(n);
}

/**
 * Read a session date and return it as YYYY-MM-DD.
 * Accepted: YYYY-MM-DD (optionally with a midnight time, as some exports add) and
 * DD.MM.YYYY (day first is the only reading of the dotted form in locales that use it).
 * Refused: slashed dates, because 03/04/2025 is 3 April in some locales and 4 March in
 * others; and impossible calendar dates such as 2025-02-30.
 */
export function parseSessionDate(text: string): CellResult<string> {
  let year: number;
  let month: number;
  let day: number;
  const iso = ISO_DATE.exec(text);
  const dotted = iso === null ? DOTTED_DATE.exec(text) : null;
  if (iso !== null) {
    year = Number(iso[1]);
    month = Number(iso[2]);
    day = Number(iso[3]);
  } else if (dotted !== null) {
    day = Number(dotted[1]);
    month = Number(dotted[2]);
    year = Number(dotted[3]);
  } else if (SLASHED_DATE.test(text)) {
    return {
      ok: false,
      code: 'invalid-date',
      message: `Date "${text}" is ambiguous (day/month or month/day); write it as YYYY-MM-DD.`,
    };
  } else if (/^\d{5}(?:\.\d+)?$/.test(text)) {
    return {
      ok: false,
      code: 'invalid-date',
      message: `"${text}" looks like a spreadsheet date number; format the date column as a date (or as text YYYY-MM-DD).`,
    };
  } else {
    return { ok: false, code: 'invalid-date', message: `"${text}" is not a date; write it as YYYY-MM-DD (or DD.MM.YYYY).` };
  }
  if (year < 1900 || month < 1 || month > 12 || day < 1 || day > daysInMonth(year, month)) {
    return { ok: false, code: 'invalid-date', message: `Date "${text}" does not exist in the calendar; write a real date as YYYY-MM-DD.` };
  }
  return { ok: true, value: `${year}-${pad2(month)}-${pad2(day)}` };
}
