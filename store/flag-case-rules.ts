/**
 * When a dismissed case counts as materially worse (and re-opens), and the effect size the review
 * page ranks by. The rule is written out in docs/methods.md §6.7, "Flag cases and re-opening".
 */
import { isDataEntryKind, type Flag, type FlagEvidence, type FlagKind } from '../domain/flags.js';

/** Kinds whose case is one session's finding: the session is part of the case's scope. */
export function isSessionScoped(kind: FlagKind): boolean {
  return isDataEntryKind(kind) || kind === 'straight-lining';
}

/** Evidence fields that carry the size of an effect in rating points, in order of preference. */
const POINT_FIELDS = ['meanOffset', 'recentShiftPoints', 'meanRecentShiftPoints', 'shiftPoints', 'effectPoints', 'meanShiftPoints'] as const;

/** An effect grows "materially" when it exceeds the dismissed size by more than this fraction of it. */
export const REOPEN_GROWTH_FRACTION = 0.5;
/** A p-value (or q-value) falls "materially" when it becomes smaller by at least this factor. */
export const REOPEN_P_FACTOR = 100;

function finite(value: unknown): number | null {
  return typeof value === 'number' && Number.isFinite(value) ? value : null;
}

/**
 * The size of the effect behind a flag: an absolute shift in rating points when the evidence
 * has one, otherwise the absolute test statistic, otherwise n (for counts of data findings).
 */
export function effectSize(evidence: FlagEvidence): { value: number; unit: 'points' | 'statistic' | 'count' } {
  for (const field of POINT_FIELDS) {
    const v = finite(evidence[field]);
    if (v !== null) return { value: Math.abs(v), unit: 'points' };
  }
  const statistic = finite(evidence.statistic);
  // A level flag summarising several attributes carries the average offset (points) as its statistic.
  const perAttribute = Array.isArray(evidence.attributes) ? (evidence.attributes as Record<string, unknown>[]) : [];
  if (statistic !== null && perAttribute.some((a) => typeof a === 'object' && a !== null && 'meanOffset' in a)) return { value: Math.abs(statistic), unit: 'points' };
  if (statistic !== null) return { value: Math.abs(statistic), unit: 'statistic' };
  return { value: evidence.n, unit: 'count' };
}

function pOf(evidence: FlagEvidence): number | null {
  return finite(evidence.qValue) ?? finite(evidence.pValue);
}

/**
 * Why `now` is materially worse than `before` (the evidence when it was dismissed, or at the
 * previous build), or null when it stays within it.
 */
export function worseningReason(before: { severity: Flag['severity']; evidence: FlagEvidence }, now: Pick<Flag, 'severity' | 'evidence'>): string | null {
  if (before.severity === 'watch' && now.severity === 'act') return 'severity rose from watch to act';
  const a = effectSize(before.evidence);
  const b = effectSize(now.evidence);
  if (a.unit === b.unit && b.value > a.value * (1 + REOPEN_GROWTH_FRACTION) && b.value > 0) {
    const unit = a.unit === 'points' ? ' points' : '';
    return `the effect grew from ${a.value.toFixed(2)}${unit} to ${b.value.toFixed(2)}${unit} (more than ${REOPEN_GROWTH_FRACTION * 100} % larger)`;
  }
  const pa = pOf(before.evidence);
  const pb = pOf(now.evidence);
  if (pa !== null && pb !== null && pb * REOPEN_P_FACTOR <= pa) return `the p-value fell by a factor of ${REOPEN_P_FACTOR} or more`;
  return null;
}
