/** The flags list (filter by kind, severity, status) and the retraining list (open act flags by assessor). */
import type { RetrainingEvaluation } from '../analysis/flags/retraining.js';
import { FLAG_KINDS, isDataEntryKind, type Flag, type FlagKind, type FlagSeverity } from '../domain/flags.js';
import { kindLabel, localTime } from './words.js';
import { assessorMonitorHref, evidenceItems, monitorCrumbs, monitorHref, REVIEW_NOTICE, type EvidenceItem } from './monitor-common.js';
import type { PageViewBase } from './page-common.js';

export interface FlagRecordInput {
  id: number;
  key: string;
  flag: Flag;
  status: 'open' | 'dismissed' | 'closed';
  reviewNote: string | null;
  reviewedAt: string | null;
  isCurrent: boolean;
}

export interface FlagItem {
  id: number;
  key: string;
  kind: FlagKind;
  /** The kind in words about the ratings (the kind code stays in `kind` and in `flag`). */
  kindLabel: string;
  /** The case page: evidence table and chart. */
  caseHref: string;
  severity: FlagSeverity;
  assessor: string | null;
  assessorHref: string | null;
  product: string | null;
  attribute: string | null;
  firstSession: string;
  message: string;
  evidence: EvidenceItem[];
  status: 'open' | 'dismissed' | 'closed';
  isOpen: boolean;
  reviewNote: string | null;
  reviewedAt: string | null;
  reviewAction: string;
  /** The Flag object exactly as the CLI and API give it. */
  flag: Flag;
}

export interface FlagFilter {
  kind: FlagKind | null;
  severity: FlagSeverity | null;
  status: 'open' | 'dismissed' | 'closed' | null;
}

export interface FlagsListView extends PageViewBase {
  panel: string;
  notices: readonly string[];
  filter: FlagFilter;
  kindOptions: { value: string; label: string; isSelected: boolean }[];
  severityOptions: { value: string; isSelected: boolean }[];
  statusOptions: { value: string; isSelected: boolean }[];
  nTotal: number;
  nShown: number;
  flags: FlagItem[];
  formAction: string;
  apiHref: string;
}

export function flagReviewAction(panel: string, flagId: number): string {
  return `${monitorHref(panel, 'flags')}/${flagId}/review`;
}

function toItem(panel: string, record: FlagRecordInput): FlagItem {
  const f = record.flag;
  return {
    id: record.id,
    key: record.key,
    kind: f.kind,
    kindLabel: kindLabel(f.kind),
    caseHref: `${monitorHref(panel)}/cases/${record.id}`,
    severity: f.severity,
    assessor: f.assessor,
    assessorHref: f.assessor === null ? null : assessorMonitorHref(panel, f.assessor, f.attribute ?? undefined),
    product: f.product,
    attribute: f.attribute,
    firstSession: f.firstSession,
    message: f.message,
    evidence: evidenceItems(f),
    status: record.status,
    isOpen: record.status === 'open',
    reviewNote: record.reviewNote,
    reviewedAt: record.reviewedAt === null ? null : localTime(record.reviewedAt),
    reviewAction: flagReviewAction(panel, record.id),
    flag: f,
  };
}

/** Parses the query's filter; unknown values are ignored (shown as "all"). */
export function parseFlagFilter(query: { kind?: string; severity?: string; status?: string }): FlagFilter {
  return {
    kind: (FLAG_KINDS as readonly string[]).includes(query.kind ?? '') ? (query.kind as FlagKind) : null,
    severity: query.severity === 'act' || query.severity === 'watch' ? query.severity : null,
    status: query.status === 'open' || query.status === 'dismissed' || query.status === 'closed' ? query.status : null,
  };
}

export function buildFlagsListView(input: { panel: string; records: readonly FlagRecordInput[]; filter: FlagFilter }): FlagsListView {
  const { filter } = input;
  const shown = input.records.filter(
    (r) =>
      (filter.kind === null || r.flag.kind === filter.kind) &&
      (filter.severity === null || r.flag.severity === filter.severity) &&
      (filter.status === null || r.status === filter.status),
  );
  const options = (values: readonly string[], selected: string | null) => values.map((value) => ({ value, isSelected: value === selected }));
  return {
    title: `Flags: ${input.panel}`,
    breadcrumbs: monitorCrumbs(input.panel, 'Flags'),
    panel: input.panel,
    notices: REVIEW_NOTICE,
    filter,
    kindOptions: options(FLAG_KINDS, filter.kind).map((o) => ({ ...o, label: kindLabel(o.value) })),
    severityOptions: options(['act', 'watch'], filter.severity),
    statusOptions: options(['open', 'dismissed', 'closed'], filter.status),
    nTotal: input.records.length,
    nShown: shown.length,
    flags: shown.map((r) => toItem(input.panel, r)),
    formAction: monitorHref(input.panel, 'flags'),
    apiHref: `/api/panels/${encodeURIComponent(input.panel)}/flags`,
  };
}

export interface RetrainingRecordInput {
  id: number;
  assessor: string;
  status: 'planned' | 'done';
  date: string;
  note: string;
  flagKeys: string[];
  outcome: RetrainingEvaluation | null;
}

/** The before/after evidence of a retraining, as a sentence and one row per index compared. */
export interface RetrainingOutcomeView {
  decision: 'close' | 'keep' | 'wait';
  message: string;
  eventSession: string;
  rows: {
    index: string;
    description: string;
    kinds: string;
    nBefore: number;
    meanBefore: number | null;
    nAfter: number;
    meanAfter: number | null;
    t: number | null;
    df: number | null;
    pValue: number | null;
    improved: boolean;
  }[];
}

export function retrainingOutcomeView(outcome: RetrainingEvaluation | null): RetrainingOutcomeView | null {
  if (!outcome) return null;
  return {
    decision: outcome.decision,
    message: outcome.message,
    eventSession: outcome.eventSession,
    rows: outcome.comparisons.map((c) => ({
      index: c.index,
      description: c.description,
      kinds: c.kinds.join(', '),
      nBefore: c.before.values.length,
      meanBefore: c.before.mean,
      nAfter: c.after.values.length,
      meanAfter: c.after.mean,
      t: c.test?.t ?? null,
      df: c.test?.df ?? null,
      pValue: c.test?.pValue ?? null,
      improved: c.improved,
    })),
  };
}

export interface RetrainingGroup {
  assessor: string;
  assessorHref: string;
  flags: FlagItem[];
  records: (RetrainingRecordInput & { outcomeView: RetrainingOutcomeView | null; updateAction: string })[];
  /** Keys of the open act flags, posted with a new record to link them. */
  flagKeysValue: string;
  addAction: string;
}

export interface RetrainingView extends PageViewBase {
  panel: string;
  notices: readonly string[];
  groups: RetrainingGroup[];
  nAssessors: number;
}

/** Open act-level flags grouped by assessor, with the retraining records of each (also assessors with records only). */
export function buildRetrainingView(input: { panel: string; records: readonly FlagRecordInput[]; retraining: readonly RetrainingRecordInput[] }): RetrainingView {
  // Data-entry findings are corrected in the data; they never put anyone on the retraining list.
  const openAct = input.records.filter((r) => r.status === 'open' && r.flag.severity === 'act' && r.flag.assessor !== null && !isDataEntryKind(r.flag.kind));
  const assessors = [...new Set([...openAct.map((r) => r.flag.assessor as string), ...input.retraining.map((r) => r.assessor)])].sort();
  const base = monitorHref(input.panel, 'retraining');
  const groups = assessors.map((assessor): RetrainingGroup => {
    const flags = openAct.filter((r) => r.flag.assessor === assessor).map((r) => toItem(input.panel, r));
    return {
      assessor,
      assessorHref: assessorMonitorHref(input.panel, assessor),
      flags,
      records: input.retraining
        .filter((r) => r.assessor === assessor)
        .map((r) => ({
          ...r,
          outcomeView: retrainingOutcomeView(r.outcome),
          updateAction: `${base}/${r.id}`,
        })),
      flagKeysValue: flags.map((f) => f.key).join('\n'),
      addAction: base,
    };
  });
  return {
    title: `Retraining: ${input.panel}`,
    breadcrumbs: monitorCrumbs(input.panel, 'Retraining'),
    panel: input.panel,
    notices: REVIEW_NOTICE,
    groups,
    nAssessors: groups.length,
  };
}
