/** Small helpers of the row reader: trimmed cell text, number and scale formatting, parse caches, key roles. */
import type { ScaleRange } from '../domain/ratings.js';
import { restoreFormulaText } from './spreadsheet-safe.js';

/**
 * Cell text trimmed; for CSV also with the export's apostrophe formula prefix removed
 * (.xlsx cells are typed, so export never prefixes them and an apostrophe there is data).
 */
export function cellText(text: string | undefined, restoreFormulas: boolean): string {
  if (text === undefined) return '';
  // Common case first: printable ASCII at both ends (nothing to trim) and no apostrophe that the
  // export could have added (at the start, or after a line break inside the cell).
  const first = text.charCodeAt(0);
  const last = text.charCodeAt(text.length - 1);
  if (first > 32 && first < 127 && last > 32 && last < 127 && (!restoreFormulas || text.indexOf("'") === -1)) return text;
  const trimmed = text.trim();
  if (!restoreFormulas) return trimmed;
  return restoreFormulaText(trimmed).trim();
}

export function formatNumber(value: number): string {
  return String(Number(value.toPrecision(12)));
}

export function formatScale(scale: ScaleRange): string {
  return `${formatNumber(scale.min)}–${formatNumber(scale.max)}`;
}

/** Distinct texts remembered per kind of cell; beyond that, cells are parsed each time (memory stays bounded). */
export const MAX_CACHED_TEXTS = 10_000;

/** A parse result by cell text (results are never changed, so rows may share one). */
export function parseCached<T>(cache: Map<string, T>, text: string, parse: (text: string) => T): T {
  let parsed = cache.get(text);
  if (parsed === undefined) {
    parsed = parse(text);
    if (cache.size < MAX_CACHED_TEXTS) cache.set(text, parsed);
  }
  return parsed;
}

export const KEY_ROLES = ['session', 'assessor', 'product', 'attribute'] as const;
export type KeyRole = (typeof KEY_ROLES)[number];
export const KEY_ROLE_INDEX: Record<KeyRole, number> = { session: 0, assessor: 1, product: 2, attribute: 3 };
export const KEY_ROLE_NAMES = ['session label', 'assessor', 'product', 'attribute'];

/** The same calendar day a year later (29 February → 1 March), for YYYY-MM-DD text. */
export function oneYearAfter(isoDate: string): string {
  const [year, month, day] = isoDate.split('-').map(Number);
  return new Date(Date.UTC(year + 1, month - 1, day)).toISOString().slice(0, 10);
}
