/** Home (the panels), one panel (its sessions), one session (its ratings, also as CSV). */
import type { FastifyInstance } from 'fastify';
import { LONG_COLUMNS } from '../../domain/ratings.js';
import { csvRecords } from '../../ingest/csv-writer.js';
import { sessionHref } from '../../report/page-common.js';
import { buildPanelView } from '../../report/panel-view.js';
import { buildPanelsView } from '../../report/panels-view.js';
import { buildSessionView } from '../../report/session-view.js';
import { readPanelAttributes, readPanelSummaries, readPanelSummary, readSessionSummaries, type PanelSummaryRow } from '../../store/read-panels.js';
import { readSessionProducts, readSessionRatingRows, readSessionSummary } from '../../store/read-sessions.js';
import type { Database } from 'better-sqlite3';
import { AppError } from '../errors.js';
import { registerPage } from '../plugins/pages.js';

export function requirePanel(db: Database, panel: string): PanelSummaryRow {
  const summary = readPanelSummary(db, panel);
  if (summary === null) throw new AppError('PANEL_NOT_FOUND', { panel: panel.slice(0, 200) });
  return summary;
}

function requireSession(db: Database, panel: string, session: string) {
  const summary = requirePanel(db, panel);
  const sessionRow = readSessionSummary(db, summary.panelId, session);
  if (sessionRow === null) throw new AppError('SESSION_NOT_FOUND', { panel: panel.slice(0, 200), session: session.slice(0, 200) });
  return { panelRow: summary, sessionRow };
}

export async function panelPageRoutes(app: FastifyInstance): Promise<void> {
  const { db } = app;

  registerPage(app, {
    url: '/',
    template: 'home',
    build: () => buildPanelsView(readPanelSummaries(db)),
  });

  registerPage(app, {
    url: '/panels/:panel',
    template: 'panel',
    build: ({ params }) => {
      const summary = requirePanel(db, params.panel);
      return buildPanelView({
        summary,
        attributes: readPanelAttributes(db, summary.panelId),
        sessions: readSessionSummaries(db, summary.panelId),
      });
    },
  });

  registerPage(app, {
    url: '/panels/:panel/sessions/:session',
    template: 'session',
    build: ({ params }) => {
      const { panelRow, sessionRow } = requireSession(db, params.panel, params.session);
      return buildSessionView({
        panel: panelRow.name,
        summary: sessionRow,
        ratings: readSessionRatingRows(db, sessionRow.sessionId),
        products: readSessionProducts(db, sessionRow.sessionId),
        attributes: readPanelAttributes(db, panelRow.panelId),
        csvHref: `${sessionHref(panelRow.name, sessionRow.label)}.csv`,
      });
    },
    // Long form, the same columns as `panel-steward export`, so the download imports back as is.
    csv: ({ params }) => {
      const { panelRow, sessionRow } = requireSession(db, params.panel, params.session);
      const rows = readSessionRatingRows(db, sessionRow.sessionId).map((rating) => [
        sessionRow.label,
        sessionRow.date,
        rating.assessor,
        rating.product,
        rating.replicate,
        rating.attribute,
        rating.value,
        rating.code,
      ]);
      return {
        fileName: `${panelRow.name}-${sessionRow.label}.csv`,
        text: csvRecords([LONG_COLUMNS, ...rows], { recordDelimiter: '\r\n' }),
      };
    },
  });
}
