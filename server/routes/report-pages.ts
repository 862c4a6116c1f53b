/**
 * Report pages: a session's report, a report over a range of sessions, and an assessor's
 * feedback sheet; each with its JSON twin, the reports with CSV twins (`.csv`, `?table=`).
 */
import type { FastifyInstance } from 'fastify';
import { panelHref } from '../../report/page-common.js';
import { listReportSessions } from '../../store/read-report.js';
import { findPanel } from '../../store/fits-sessions.js';
import { AppError } from '../errors.js';
import { registerPage } from '../plugins/pages.js';
import { assessorFeedback, rangeReport, sessionReport, type FeedbackPeriod } from '../reports/report-data.js';
import { rangeReportCsv, reportTable, sessionReportCsv } from '../reports/report-csv.js';

/** Sessions a range report covers when none are named: the latest 12. */
const DEFAULT_RANGE_SESSIONS = 12;

function queryText(query: Record<string, unknown>, name: string): string | undefined {
  const value = query[name];
  const last = Array.isArray(value) ? value[value.length - 1] : value;
  return typeof last === 'string' && last.length > 0 ? last.slice(0, 200) : undefined;
}

export async function reportPageRoutes(app: FastifyInstance): Promise<void> {
  const { db } = app;
  app.navSections.push({ label: 'Report', scope: 'panel', href: (panel) => `${panelHref(panel)}/report`, order: 15 });

  const range = (panel: string, query: Record<string, unknown>) => {
    let from = queryText(query, 'from');
    let to = queryText(query, 'to');
    if (from === undefined || to === undefined) {
      const found = findPanel(db, panel);
      if (!found) throw new AppError('PANEL_NOT_FOUND', { panel: panel.slice(0, 200) });
      const sessions = listReportSessions(db, found.id);
      if (sessions.length === 0) throw new AppError('BAD_REQUEST', { detail: 'this panel has no sessions yet.' });
      to ??= sessions[sessions.length - 1].label;
      const end = sessions.findIndex((s) => s.label === to);
      from ??= sessions[Math.max(0, (end < 0 ? sessions.length - 1 : end) - DEFAULT_RANGE_SESSIONS + 1)].label;
    }
    return rangeReport(db, panel, from, to);
  };

  registerPage(app, {
    url: '/panels/:panel/sessions/:session/report',
    template: 'report-session',
    build: ({ params }) => sessionReport(db, params.panel, params.session),
    csv: ({ params, query }) => ({
      fileName: `${params.panel}-${params.session}-report-${reportTable(query.table)}.csv`,
      text: sessionReportCsv(sessionReport(db, params.panel, params.session), reportTable(query.table)),
    }),
  });

  registerPage(app, {
    url: '/panels/:panel/report',
    template: 'report-range',
    build: ({ params, query }) => range(params.panel, query),
    csv: ({ params, query }) => {
      const view = range(params.panel, query);
      return { fileName: `${params.panel}-${view.from}-${view.to}-report-${reportTable(query.table)}.csv`, text: rangeReportCsv(view, reportTable(query.table)) };
    },
  });

  registerPage(app, {
    url: '/panels/:panel/assessors/:assessor/feedback',
    template: 'report-feedback',
    build: ({ params, query }) => {
      const session = queryText(query, 'session');
      const from = queryText(query, 'from');
      const to = queryText(query, 'to');
      const period: FeedbackPeriod = session !== undefined ? { session } : from !== undefined && to !== undefined ? { from, to } : {};
      return assessorFeedback(db, params.panel, params.assessor, period);
    },
  });
}
