/**
 * The result of one import as a person reads it: outcome, counts, findings and problems (each
 * naming file, row and column). Used by the upload page right after an upload and by the
 * import's own page later, from the stored answer.
 */
import type { InputFinding, InputProblem } from '../domain/problems.js';
import { importHref, panelHref, sessionHref } from './page-common.js';

import type { ImportCounts, ImportOutcome } from '../domain/imports.js';
export type { ImportOutcome } from '../domain/imports.js';

/** The counts of an import answer (the store's ImportReport.counts). */
export type ImportCountsInput = ImportCounts;

/** The part of the store's ImportReport this view reads. */
export interface ImportAnswerInput {
  ok: boolean;
  outcome: ImportOutcome;
  importId: number | null;
  panel: string;
  fileName: string;
  sha256?: string;
  counts?: Partial<ImportCountsInput>;
  changedSessions?: string[];
  findings?: InputFinding[];
  errors?: InputProblem[];
  totalErrors?: number;
  message?: string;
}

export interface LabelledCount {
  key: keyof ImportCountsInput;
  label: string;
  value: number;
}

export interface ImportResultView {
  ok: boolean;
  outcome: ImportOutcome;
  /** A short heading for the outcome, e.g. "Imported" or "Rejected: nothing was written". */
  outcomeLabel: string;
  message: string;
  importId: number | null;
  importHref: string | null;
  panel: string;
  /** null when a rejected import named a panel that is not in the store (nothing was written). */
  panelHref: string | null;
  /** The panel's weekly review page (what changed with this import), when sessions were written. */
  reviewHref: string | null;
  fileName: string;
  counts: LabelledCount[];
  changedSessions: { label: string; href: string }[];
  findings: InputFinding[];
  errors: InputProblem[];
  totalErrors: number;
  /** Problems counted but not listed (the list stops at the first 100). */
  nErrorsNotListed: number;
}

const COUNT_LABELS: [keyof ImportCountsInput, string][] = [
  ['rows', 'Rows read'],
  ['ratings', 'Valid ratings read'],
  ['missingCells', 'Empty cells (missing ratings)'],
  ['sessions', 'Sessions in the file'],
  ['sessionsNew', 'New sessions'],
  ['sessionsReplaced', 'Sessions replaced by a changed version'],
  ['sessionsUnchanged', 'Sessions already stored unchanged'],
  ['valuesReplaced', 'Values replaced (kept in the correction history)'],
  ['quarantined', 'Cells put in quarantine'],
];

const OUTCOME_LABELS: Record<ImportOutcome, string> = {
  imported: 'Imported',
  unchanged: 'Unchanged: this file was already imported',
  rejected: 'Rejected: nothing was written',
  quarantined: 'Imported with cells held in quarantine',
};

export function buildImportResultView(answer: ImportAnswerInput): ImportResultView {
  const errors = answer.errors ?? [];
  const totalErrors = answer.totalErrors ?? errors.length;
  return {
    ok: answer.ok,
    outcome: answer.outcome,
    outcomeLabel: OUTCOME_LABELS[answer.outcome] ?? answer.outcome,
    message: answer.message ?? '',
    importId: answer.importId,
    importHref: answer.importId === null ? null : importHref(answer.importId),
    panel: answer.panel,
    // A rejected import under a new panel name leaves no panel behind, so there is no page to link.
    panelHref: answer.outcome === 'rejected' && answer.importId === null ? null : panelHref(answer.panel),
    reviewHref: (answer.changedSessions ?? []).length > 0 ? `${panelHref(answer.panel)}/monitor/review` : null,
    fileName: answer.fileName,
    counts: COUNT_LABELS.map(([key, label]) => ({ key, label, value: answer.counts?.[key] ?? 0 })),
    changedSessions: (answer.changedSessions ?? []).map((label) => ({ label, href: sessionHref(answer.panel, label) })),
    findings: answer.findings ?? [],
    errors,
    totalErrors,
    nErrorsNotListed: Math.max(0, totalErrors - errors.length),
  };
}
