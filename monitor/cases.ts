/**
 * Cases as the review pages show them: one count source, the summary line of a case, related
 * cases folded together (a drift and the level difference it leads to, for the same assessor and
 * attribute, are one case with both pieces of evidence), and "since the last session".
 */
import { isDataEntryKind, type FlagKind } from '../domain/flags.js';
import { evidenceRows, type EvidenceRow } from '../report/case-evidence.js';
import { assessorMonitorHref, monitorHref } from '../report/monitor-common.js';
import { kindLabel, localTime, plural, readable } from '../report/words.js';
import { effectSize } from '../store/flag-case-rules.js';
import type { FlagHistoryEntry, FlagRecord } from '../store/monitor-flags.js';

export interface CaseCounts {
  /** Open cases about how people rate (data-entry findings not included). */
  open: number;
  act: number;
  watch: number;
  dismissed: number;
  /** Open data-entry findings. */
  dataToCheck: number;
  /** Every case whose evidence fires now (what `flags --format json` lists). */
  current: number;
}

/** The one count of cases every page shows. */
export function caseCounts(records: readonly FlagRecord[]): CaseCounts {
  const current = records.filter((r) => r.isCurrent);
  const rating = current.filter((r) => !isDataEntryKind(r.flag.kind));
  const open = rating.filter((r) => r.status === 'open');
  return {
    open: open.length,
    act: open.filter((r) => r.flag.severity === 'act').length,
    watch: open.filter((r) => r.flag.severity === 'watch').length,
    dismissed: current.filter((r) => r.status === 'dismissed').length,
    dataToCheck: current.filter((r) => r.status === 'open' && isDataEntryKind(r.flag.kind)).length,
    current: current.length,
  };
}

export function countsSentence(counts: CaseCounts): string {
  return `${plural(counts.open, 'open case')} (${counts.act} act, ${counts.watch} watch), ${plural(counts.dataToCheck, 'data finding')} to check, ${counts.dismissed} dismissed.`;
}

export function caseHref(panel: string, id: number): string {
  return `${monitorHref(panel)}/cases/${id}`;
}

export interface CaseHistoryItem {
  status: string;
  when: string;
  who: string;
  note: string;
  session: string | null;
}

export interface CaseSummary {
  id: number;
  href: string;
  /** The kind code (as in the JSON contract) and its label in words. */
  kind: FlagKind;
  kindLabel: string;
  severity: 'act' | 'watch';
  status: 'open' | 'dismissed' | 'closed';
  isCurrent: boolean;
  assessor: string | null;
  assessorHref: string | null;
  attribute: string | null;
  product: string | null;
  /** "A02 · sweet" */
  scope: string;
  message: string;
  /** The effect in words with its unit ("0.84 points"), for ranking at a glance. */
  effect: string;
  effectValue: number;
  detectedSession: string;
  updatedSession: string;
  evidence: EvidenceRow[];
  /** The latest note of the status history (a dismissal's note, a re-opening's reason). */
  lastNote: CaseHistoryItem | null;
  /** Other cases on the same assessor and attribute shown with this one. */
  related: CaseSummary[];
}

function historyItem(entry: FlagHistoryEntry): CaseHistoryItem {
  return { status: entry.status, when: localTime(entry.reviewedAt), who: entry.reviewedBy, note: entry.note, session: entry.session };
}

export function caseSummary(panel: string, record: FlagRecord, history: readonly FlagHistoryEntry[]): CaseSummary {
  const f = record.flag;
  const size = effectSize(f.evidence);
  const last = history.at(-1);
  return {
    id: record.id,
    href: caseHref(panel, record.id),
    kind: f.kind,
    kindLabel: kindLabel(f.kind),
    severity: f.severity,
    status: record.status,
    isCurrent: record.isCurrent,
    assessor: f.assessor,
    assessorHref: f.assessor === null ? null : assessorMonitorHref(panel, f.assessor, f.attribute ?? undefined),
    attribute: f.attribute,
    product: f.product,
    scope: [f.assessor ?? 'whole panel', f.attribute, f.product].filter((x) => x !== null).join(' · '),
    message: f.message,
    effect: size.unit === 'points' ? `${readable(size.value)} points` : size.unit === 'count' ? plural(size.value, 'finding') : `test statistic ${readable(size.value)}`,
    effectValue: size.unit === 'points' ? size.value : 0,
    detectedSession: record.detectedSession,
    updatedSession: record.updatedSession,
    evidence: evidenceRows(f),
    lastNote: last ? historyItem(last) : null,
    related: [],
  };
}

export function caseHistory(history: readonly FlagHistoryEntry[]): CaseHistoryItem[] {
  return history.map(historyItem);
}

/** Kinds that describe one thing from two sides, so they are shown as one case. */
const FAMILY: Partial<Record<FlagKind, string>> = {
  lenient: 'level',
  harsh: 'level',
  drift: 'level',
  'scale-compression': 'scaling',
  'scale-expansion': 'scaling',
  disagreement: 'order',
  reversed: 'order',
};

/** Which of two related cases leads: act before watch, then a level difference before a drift. */
function leads(a: CaseSummary, b: CaseSummary): number {
  if (a.severity !== b.severity) return a.severity === 'act' ? -1 : 1;
  return (a.kind === 'drift' ? 1 : 0) - (b.kind === 'drift' ? 1 : 0);
}

/** Folds related cases (same assessor, attribute and family) into the leading one. */
export function foldRelated(cases: CaseSummary[]): CaseSummary[] {
  const groups = new Map<string, CaseSummary[]>();
  const out: CaseSummary[] = [];
  for (const c of cases) {
    const family = FAMILY[c.kind];
    // A case without an attribute is about the assessor's ratings across attributes: cases of one
    // family across attributes (e.g. a drift and the lenient level it led to) fold together too.
    if (!family || c.assessor === null) {
      out.push(c);
      continue;
    }
    const key = `${c.assessor}\u0000${c.attribute ?? '(across attributes)'}\u0000${family}`;
    const list = groups.get(key);
    if (list) list.push(c);
    else groups.set(key, [c]);
  }
  for (const list of groups.values()) {
    const [lead, ...rest] = [...list].sort(leads);
    out.push({ ...lead, related: rest });
  }
  return out;
}

/** Largest effect first (cases with an effect in points before the others), then by scope. */
export function byEffect(a: CaseSummary, b: CaseSummary): number {
  return b.effectValue - a.effectValue || a.scope.localeCompare(b.scope);
}

export interface AssessorCases {
  assessor: string;
  assessorHref: string | null;
  cases: CaseSummary[];
}

/** Cases grouped by assessor (the panel as a whole last), assessors ranked by their largest effect. */
export function groupByAssessor(cases: CaseSummary[]): AssessorCases[] {
  const groups = new Map<string, CaseSummary[]>();
  for (const c of cases) {
    const key = c.assessor ?? '';
    const list = groups.get(key);
    if (list) list.push(c);
    else groups.set(key, [c]);
  }
  return [...groups.entries()]
    .map(([assessor, list]) => ({ assessor: assessor === '' ? 'Whole panel' : assessor, assessorHref: list[0].assessorHref, cases: list.sort(byEffect) }))
    .sort((a, b) => (a.assessor === 'Whole panel' ? 1 : 0) - (b.assessor === 'Whole panel' ? 1 : 0) || byEffect(a.cases[0], b.cases[0]));
}

export { isDataEntryKind };
