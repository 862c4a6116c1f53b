/** The imports list (all panels, or one) and one import with its findings, problems and quarantine. */
import { buildImportResultView, type ImportAnswerInput, type ImportOutcome, type ImportResultView } from './import-result-view.js';
import { HOME_CRUMB, importHref, panelHref, type PageViewBase } from './page-common.js';
import type { QuarantineListRow } from '../domain/problems.js';
import type { ImportSummary } from '../domain/imports.js';

export type ImportRowInput = ImportSummary;

export interface ImportListItem extends ImportRowInput {
  href: string;
  panelHref: string;
}

export interface ImportsView extends PageViewBase {
  /** The panel the list is limited to, or null for every panel. */
  panel: string | null;
  imports: ImportListItem[];
  nImportsTotal: number;
  /** True when the list stops before the oldest import. */
  isTruncated: boolean;
}

function listItem(row: ImportRowInput): ImportListItem {
  return { ...row, href: importHref(row.importId), panelHref: panelHref(row.panel) };
}

export function buildImportsView(input: { panel: string | null; rows: ImportRowInput[]; nImportsTotal: number }): ImportsView {
  const breadcrumbs =
    input.panel === null
      ? [HOME_CRUMB, { label: 'Imports', href: null }]
      : [HOME_CRUMB, { label: input.panel, href: panelHref(input.panel) }, { label: 'Imports', href: null }];
  return {
    title: input.panel === null ? 'Imports' : `Imports of panel ${input.panel}`,
    breadcrumbs,
    panel: input.panel,
    imports: input.rows.map(listItem),
    nImportsTotal: input.nImportsTotal,
    isTruncated: input.rows.length < input.nImportsTotal,
  };
}

export type QuarantineInput = QuarantineListRow;

export interface ImportView extends PageViewBase {
  /** The panel imported into (also gives the page its panel navigation). */
  panel: string;
  import: ImportListItem;
  /** The answer given when the import ran; null if the stored copy cannot be read. */
  result: ImportResultView | null;
  quarantine: QuarantineInput[];
  /** Quarantined cells of this import not listed on the page. */
  nQuarantineNotListed: number;
}

/** Reads the stored answer; a damaged or empty copy gives null rather than a broken page. */
function parseStoredAnswer(row: ImportRowInput, reportJson: string): ImportResultView | null {
  let parsed: unknown;
  try {
    parsed = JSON.parse(reportJson);
  } catch {
    return null;
  }
  if (typeof parsed !== 'object' || parsed === null || !('outcome' in parsed)) return null;
  const answer = parsed as Partial<ImportAnswerInput>;
  return buildImportResultView({
    ok: answer.ok ?? row.outcome !== 'rejected',
    outcome: row.outcome,
    importId: row.importId,
    panel: row.panel,
    fileName: row.fileName,
    counts: answer.counts,
    changedSessions: Array.isArray(answer.changedSessions) ? answer.changedSessions : [],
    findings: Array.isArray(answer.findings) ? answer.findings : [],
    errors: Array.isArray(answer.errors) ? answer.errors : [],
    totalErrors: typeof answer.totalErrors === 'number' ? answer.totalErrors : row.nErrors,
    message: typeof answer.message === 'string' ? answer.message : '',
  });
}

export function buildImportView(input: {
  row: ImportRowInput;
  reportJson: string;
  quarantine: QuarantineInput[];
}): ImportView {
  const { row } = input;
  return {
    title: `Import ${row.importId}: ${row.fileName}`,
    breadcrumbs: [
      HOME_CRUMB,
      { label: row.panel, href: panelHref(row.panel) },
      { label: 'Imports', href: `/imports?panel=${encodeURIComponent(row.panel)}` },
      { label: `Import ${row.importId}`, href: null },
    ],
    panel: row.panel,
    import: listItem(row),
    result: parseStoredAnswer(row, input.reportJson),
    quarantine: input.quarantine.map((cell) => ({ ...cell })),
    nQuarantineNotListed: Math.max(0, row.nQuarantined - input.quarantine.length),
  };
}
