/** The flag contract of `panel-steward flags --format json` and GET /api/panels/:panel/flags. */

export const FLAG_KINDS = [
  'lenient',
  'harsh',
  'drift',
  'inconsistent',
  'non-discriminating',
  'disagreement',
  'reversed',
  'scale-compression',
  'scale-expansion',
  'unstable-product',
  'out-of-scale',
  'decimal-shift',
  'duplicate',
  'swapped-codes',
  'missing-cells',
  'straight-lining',
] as const;
export type FlagKind = (typeof FLAG_KINDS)[number];

export type FlagSeverity = 'watch' | 'act';

/** Findings about how one session's data was entered: checked and corrected, never a reason for retraining. */
export const DATA_ENTRY_KINDS: readonly FlagKind[] = ['decimal-shift', 'out-of-scale', 'duplicate', 'swapped-codes', 'missing-cells'];

export function isDataEntryKind(kind: FlagKind): boolean {
  return DATA_ENTRY_KINDS.includes(kind);
}

/** The numbers behind a flag: the test, its statistic, n, and the threshold that fired. */
export interface FlagEvidence {
  test: string;
  statistic?: number | null;
  pValue?: number | null;
  qValue?: number | null;
  n: number;
  threshold: string;
  [key: string]: unknown;
}

export interface Flag {
  kind: FlagKind;
  assessor: string | null;
  product: string | null;
  attribute: string | null;
  firstSession: string;
  severity: FlagSeverity;
  evidence: FlagEvidence;
  message: string;
}

export type FlagStatus = 'open' | 'dismissed' | 'closed';

/**
 * A flag as a case: the same kind + assessor + product + attribute keeps one `id` across refits
 * and weeks while its evidence is updated in place. Every field of Flag, plus the case fields.
 */
export interface FlagCase extends Flag {
  id: number;
  status: FlagStatus;
  /** The session whose data first raised the case. */
  detectedSession: string;
  /** The newest session the current evidence reflects. */
  updatedSession: string;
}
