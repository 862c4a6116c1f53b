/**
 * The duplicate rule shared by the import (store/import-core.ts) and `analyze`
 * (server/cli/analyze-command.ts): two ratings with the same session, attribute, assessor,
 * product and replicate are an exact repeat (counted once) when value and sample code agree,
 * otherwise a conflict (a problem: the rating cannot be used until one copy is removed). Finding
 * the earlier copy stays with each caller (a staging table keyed on the five keys; a coded key
 * index in memory); what the two copies mean is decided here only. Methods §5.4.
 */
export type RepeatKind = 'exact-repeat' | 'conflict';

/** `code`: the sample code, or null / undefined / 0 (the import's id for none) when there is none. */
export interface RatingCopy {
  value: number;
  code?: string | number | null;
}

export function classifyRepeat(earlier: RatingCopy, later: RatingCopy): RepeatKind {
  return earlier.value === later.value && noneAsNull(earlier.code) === noneAsNull(later.code) ? 'exact-repeat' : 'conflict';
}

const noneAsNull = (code: string | number | null | undefined): string | number | null => (code === undefined || code === 0 ? null : code);
