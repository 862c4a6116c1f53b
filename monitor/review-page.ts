/**
 * The weekly review page of a panel (its landing page): what changed since the last session,
 * the open act cases by assessor ranked by effect size, watch cases folded below, dismissed cases,
 * and the data-entry findings as their own "data to check" list with links to the import and the
 * held cells. Pure: a function of the loaded panel context.
 */
import { isDataEntryKind } from '../domain/flags.js';
import { monitorCrumbs, monitorHref } from '../report/monitor-common.js';
import type { PageViewBase } from '../report/page-common.js';
import { importHref } from '../report/page-common.js';
import { byEffect, caseCounts, caseSummary, countsSentence, foldRelated, groupByAssessor, type AssessorCases, type CaseCounts, type CaseSummary } from './cases.js';
import type { PanelContext } from './panel-context.js';
import { refitNotice, type RefitNotice } from './refit-notice.js';

export interface HeldCellLink {
  id: number;
  href: string;
  text: string;
}

export interface DataCheckItem extends CaseSummary {
  session: string;
  importHref: string | null;
  heldCells: HeldCellLink[];
}

export interface ReviewPageView extends PageViewBase {
  panel: string;
  latestSession: string | null;
  previousSession: string | null;
  refit: RefitNotice;
  /** Seconds until the page reloads itself (while a refit runs); null otherwise. */
  refreshSeconds: number | null;
  counts: CaseCounts;
  countsText: string;
  sinceLast: { newCases: CaseSummary[]; newAct: CaseSummary[]; newWatch: CaseSummary[]; worse: CaseSummary[]; closed: CaseSummary[]; isEmpty: boolean };
  act: AssessorCases[];
  watch: AssessorCases[];
  nWatch: number;
  dismissed: CaseSummary[];
  dataToCheck: DataCheckItem[];
  links: { flags: string; retraining: string; events: string; monitor: string; api: string };
}

export function buildReviewPage(ctx: PanelContext): ReviewPageView {
  const panel = ctx.panel.name;
  const latest = ctx.sessions.at(-1)?.label ?? null;
  const previous = ctx.sessions.at(-2)?.label ?? null;
  const summary = (r: (typeof ctx.records)[number]) => caseSummary(panel, r, ctx.histories.get(r.id) ?? []);
  const current = ctx.records.filter((r) => r.isCurrent);
  const rating = current.filter((r) => !isDataEntryKind(r.flag.kind));
  const open = rating.filter((r) => r.status === 'open');

  const reopenedNow = (r: (typeof ctx.records)[number]) => {
    const last = ctx.histories.get(r.id)?.at(-1);
    return r.statusSession === latest && r.status === 'open' && (last?.source === 'reopened' || last?.source === 'fires-again');
  };
  const isNew = (r: (typeof ctx.records)[number]) => r.status === 'open' && (r.detectedSession === latest || reopenedNow(r));
  const newCases = foldRelated(open.filter(isNew).map(summary)).sort((a, b) => (a.severity === b.severity ? byEffect(a, b) : a.severity === 'act' ? -1 : 1));
  const worse = foldRelated(open.filter((r) => !isNew(r) && r.worsenedSession === latest).map(summary));
  const closed = ctx.records.filter((r) => r.status === 'closed' && r.statusSession === latest && !isDataEntryKind(r.flag.kind)).map(summary);

  const folded = foldRelated(open.map(summary));
  const act = folded.filter((c) => c.severity === 'act');
  const watch = folded.filter((c) => c.severity === 'watch');

  const importOf = new Map(ctx.sessions.map((s) => [s.label, s.importId]));
  const dataToCheck: DataCheckItem[] = current
    .filter((r) => r.status === 'open' && isDataEntryKind(r.flag.kind))
    .map((r) => {
      const session = r.flag.firstSession;
      const importId = importOf.get(session) ?? null;
      const heldCells = ctx.heldCells
        .filter((c) => c.session === session && (r.flag.assessor === null || c.assessor === r.flag.assessor))
        .map((c) => ({
          id: c.id,
          href: `${importHref(c.importId)}#cell-${c.id}`,
          text: `row ${c.rowNumber ?? '?'}${c.columnName ? `, column ${c.columnName}` : ''}: “${c.rawValue ?? ''}” (${c.reason})`,
        }));
      return { ...summary(r), session, importHref: importId === null ? null : importHref(importId), heldCells };
    })
    .sort((a, b) => b.session.localeCompare(a.session) || a.scope.localeCompare(b.scope));

  const refit = refitNotice(ctx.refit);
  const counts = caseCounts(ctx.records);
  return {
    title: `Weekly review: ${panel}`,
    breadcrumbs: monitorCrumbs(panel, 'Review'),
    panel,
    latestSession: latest,
    previousSession: previous,
    refit,
    refreshSeconds: refit.isRunning ? 5 : null,
    counts,
    countsText: countsSentence(counts),
    sinceLast: { newCases, newAct: newCases.filter((c) => c.severity === 'act'), newWatch: newCases.filter((c) => c.severity === 'watch'), worse, closed, isEmpty: newCases.length + worse.length + closed.length === 0 },
    act: groupByAssessor(act),
    watch: groupByAssessor(watch),
    nWatch: watch.length,
    dismissed: rating.filter((r) => r.status === 'dismissed').map(summary),
    dataToCheck,
    links: {
      flags: monitorHref(panel, 'flags'),
      retraining: monitorHref(panel, 'retraining'),
      events: monitorHref(panel, 'events'),
      monitor: monitorHref(panel),
      api: `/api/panels/${encodeURIComponent(panel)}/flags`,
    },
  };
}


