/**
 * Scores flags against the planted ground truth: which planted faults were found, and how many
 * act-level flags fell on clean assessors.
 */
import type { Flag, FlagKind } from '../../domain/flags.js';
import { FLAG_KINDS } from '../../domain/flags.js';
import type { PlantedFault } from '../../demo/generate-panel.js';

const ONE_SESSION_KINDS = new Set<FlagKind>(['out-of-scale', 'decimal-shift', 'duplicate', 'swapped-codes', 'missing-cells', 'straight-lining']);

/**
 * A flag finds a planted fault when it has the same kind and every identifying field both name
 * agrees: assessor; product (either of the two for swapped codes); attribute (a flag without an
 * attribute is assessor-wide and matches any; a fault on all attributes matches any flag
 * attribute); and, for one-session data faults, the session.
 */
export function flagFindsFault(flag: Flag, fault: PlantedFault): boolean {
  if (flag.kind !== fault.kind) return false;
  if (fault.assessor !== null && flag.assessor !== fault.assessor) return false;
  if (fault.product !== null && flag.product !== null) {
    const planted = [fault.product, fault.otherProduct].filter((p): p is string => p !== null);
    // A swap flag names one product in `product` and both in evidence.products.
    const named = fault.kind === 'swapped-codes' && Array.isArray(flag.evidence.products) ? (flag.evidence.products as string[]) : [flag.product];
    if (!named.some((p) => planted.includes(p))) return false;
  }
  // A product-less instability flag (the period model's product:session test) finds a planted
  // step only through a planted attribute.
  if (fault.kind === 'unstable-product' && flag.product === null && (flag.attribute === null || fault.attributes === null || !fault.attributes.includes(flag.attribute))) {
    return false;
  }
  if (fault.attributes !== null && flag.attribute !== null && !fault.attributes.includes(flag.attribute)) return false;
  if (ONE_SESSION_KINDS.has(fault.kind) && flag.firstSession !== fault.firstSession) return false;
  return true;
}

export interface KindTally {
  kind: FlagKind;
  planted: number;
  /** Found at watch or act. */
  found: number;
  /** Found at act. */
  foundAct: number;
  /** Faults not found, described. */
  missed: string[];
}

export interface PanelScore {
  byKind: Map<FlagKind, KindTally>;
  /** Act-level flags naming a clean assessor. */
  cleanActFlags: Flag[];
  cleanWatchFlags: Flag[];
  /** Clean assessor-years observed (clean assessors × weeks / 52). */
  cleanAssessorYears: number;
  /** Act-level unstable-product flags that find no planted step (wrong product or attribute). */
  stableProductActFlags: Flag[];
}

export function emptyTallies(): Map<FlagKind, KindTally> {
  return new Map(FLAG_KINDS.map((kind) => [kind, { kind, planted: 0, found: 0, foundAct: 0, missed: [] }]));
}

export interface ScoreOptions {
  /** Sessions each assessor was present (clean assessor-years count only these); default every week. */
  sessionsPresent?: ReadonlyMap<string, number>;
  /** Flags on clean assessors that are right although nothing was planted (e.g. a sample left out). */
  expected?: (flag: Flag) => boolean;
}

export function scorePanel(flags: readonly Flag[], truth: readonly PlantedFault[], cleanAssessors: readonly string[], nWeeks: number, label: string, options: ScoreOptions = {}): PanelScore {
  const byKind = emptyTallies();
  for (const fault of truth) {
    const tally = byKind.get(fault.kind)!;
    tally.planted++;
    const matching = flags.filter((flag) => flagFindsFault(flag, fault));
    if (matching.length > 0) tally.found++;
    else tally.missed.push(`${label}: ${fault.description}`);
    if (matching.some((flag) => flag.severity === 'act')) tally.foundAct++;
  }
  const clean = new Set(cleanAssessors);
  const planted = truth.filter((f) => f.kind === 'unstable-product');
  return {
    byKind,
    cleanActFlags: flags.filter((f) => f.severity === 'act' && f.assessor !== null && clean.has(f.assessor) && !options.expected?.(f)),
    cleanWatchFlags: flags.filter((f) => f.severity === 'watch' && f.assessor !== null && clean.has(f.assessor) && !options.expected?.(f)),
    cleanAssessorYears: cleanAssessors.reduce((sum, a) => sum + (options.sessionsPresent?.get(a) ?? nWeeks), 0) / 52,
    stableProductActFlags: flags.filter((f) => f.kind === 'unstable-product' && f.severity === 'act' && !planted.some((fault) => flagFindsFault(f, fault))),
  };
}

/** Adds panel tallies together. */
export function addTallies(total: Map<FlagKind, KindTally>, more: Map<FlagKind, KindTally>): void {
  for (const [kind, t] of more) {
    const sum = total.get(kind)!;
    sum.planted += t.planted;
    sum.found += t.found;
    sum.foundAct += t.foundAct;
    sum.missed.push(...t.missed);
  }
}

export function median(xs: readonly number[]): number | null {
  if (xs.length === 0) return null;
  const sorted = [...xs].sort((a, b) => a - b);
  const mid = Math.floor(sorted.length / 2);
  return sorted.length % 2 === 1 ? sorted[mid] : (sorted[mid - 1] + sorted[mid]) / 2;
}
