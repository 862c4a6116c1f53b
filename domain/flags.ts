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
