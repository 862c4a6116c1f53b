/**
 * One case: its sentence, the evidence table, the chart with the flagged sessions marked, the
 * related cases on the same assessor and attribute (each with its own evidence), the status
 * history, and the review form. Pure: a function of the loaded panel context.
 */
import type { Flag, FlagCase } from '../domain/flags.js';
import type { ChartView } from '../report/charts/control-chart.js';
import { monitorCrumbs, monitorHref } from '../report/monitor-common.js';
import type { PageViewBase } from '../report/page-common.js';
import { localTime } from '../report/words.js';
import { caseHistory, caseSummary, foldRelated, type CaseHistoryItem, type CaseSummary } from './cases.js';
import { caseChart } from './case-chart.js';
import type { PanelContext } from './panel-context.js';
import { refitNotice, type RefitNotice } from './refit-notice.js';

export class CaseNotFound extends Error {
  constructor(readonly caseId: string) {
    super(`No case ${caseId} in this panel.`);
    this.name = 'CaseNotFound';
  }
}

export interface CasePageView extends PageViewBase {
  panel: string;
  case: CaseSummary;
  statusText: string;
  chart: ChartView | null;
  /** How to read the chart, in one or two sentences. */
  chartNote: string | null;
  history: CaseHistoryItem[];
  reviewAction: string;
  canDismiss: boolean;
  canReopen: boolean;
  refit: RefitNotice;
  refreshSeconds: number | null;
  reviewHref: string;
  /** The case exactly as the CLI and API give it (kind codes and raw evidence). */
  flag: FlagCase;
}

export function buildCasePage(ctx: PanelContext, params: { caseId: string }): CasePageView {
  const panel = ctx.panel.name;
  const id = Number.parseInt(params.caseId, 10);
  const record = ctx.records.find((r) => r.id === id);
  if (!record || String(id) !== params.caseId) throw new CaseNotFound(params.caseId);
  const summary = (r: typeof record) => caseSummary(panel, r, ctx.histories.get(r.id) ?? []);
  // The case together with its related open cases (same assessor, attribute and family).
  const sameScope = ctx.records.filter((r) => r.isCurrent && r.flag.assessor === record.flag.assessor && r.flag.attribute === record.flag.attribute && r.id !== record.id);
  const folded = foldRelated([summary(record), ...sameScope.map(summary)]).find((c) => c.id === record.id || c.related.some((x) => x.id === record.id))!;
  const self = folded.id === record.id ? folded : { ...summary(record), related: [folded, ...folded.related.filter((x) => x.id !== record.id)].map((c) => ({ ...c, related: [] })) };
  const refit = refitNotice(ctx.refit);
  const statusText =
    record.status === 'open'
      ? record.isCurrent
        ? 'Open: waiting for review.'
        : 'Open: the evidence no longer fires, but a retraining record is waiting for its evaluation.'
      : record.status === 'dismissed'
        ? `Dismissed${record.reviewedAt ? ` on ${localTime(record.reviewedAt)}` : ''}. It stays dismissed unless the evidence gets materially worse.`
        : `Closed${record.reviewedAt ? ` on ${localTime(record.reviewedAt)}` : ''}.`;
  const chart = caseChart(record.flag, ctx.history(), { thresholds: ctx.thresholds(), sizingMemo: ctx.sizingMemo });
  return {
    title: `${summary(record).kindLabel[0].toUpperCase()}${summary(record).kindLabel.slice(1)}: ${self.scope}`,
    breadcrumbs: [...monitorCrumbs(panel, null).slice(0, -1), { label: 'Review', href: `${monitorHref(panel)}/review` }, { label: `Case ${id}`, href: null }],
    panel,
    case: self,
    statusText,
    chart,
    chartNote: chart === null ? null : chartNoteOf(record.flag, chart),
    history: caseHistory(ctx.histories.get(id) ?? []),
    reviewAction: `${monitorHref(panel, 'flags')}/${id}/review`,
    canDismiss: record.status === 'open',
    canReopen: record.status !== 'open',
    refit,
    refreshSeconds: refit.isRunning ? 5 : null,
    reviewHref: `${monitorHref(panel)}/review`,
    flag: record.flag,
  };
}

function chartNoteOf(flag: Flag, chart: ChartView): string {
  if (flag.kind === 'unstable-product')
    return `The moving average (EWMA) of ${flag.product}'s effect, in units of its baseline spread, against the limit the case rule uses; marked points are beyond it.`;
  const panelLine = chart.lines.some((line) => line.name === 'panel') ? ' The line marked “panel” is the rest of the panel.' : '';
  return `Marked points: the sessions this case rests on.${panelLine}`;
}
