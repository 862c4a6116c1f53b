/** The imports list (optionally of one panel) and one import with findings, problems and quarantine. */
import type { FastifyInstance } from 'fastify';
import { buildImportsView, buildImportView, type ImportView } from '../../report/imports-view.js';
import { countImports, readImportDetail, readImportQuarantine, readImportRows } from '../../store/read-imports.js';
import { AppError } from '../errors.js';
import { registerPage } from '../plugins/pages.js';
import { requirePanel } from './panel-pages.js';

/** Rows shown on the imports list and quarantined cells listed on an import's page. */
const MAX_LISTED_IMPORTS = 500;
const MAX_LISTED_QUARANTINE = 1000;

export async function importPageRoutes(app: FastifyInstance): Promise<void> {
  const { db } = app;

  registerPage(app, {
    url: '/imports',
    template: 'imports',
    build: ({ query }) => {
      const panel = typeof query.panel === 'string' && query.panel !== '' ? requirePanel(db, query.panel).name : null;
      const panelName = panel ?? undefined;
      return buildImportsView({
        panel,
        rows: readImportRows(db, { panelName, limit: MAX_LISTED_IMPORTS }),
        nImportsTotal: countImports(db, panelName),
      });
    },
  });

  registerPage(app, {
    url: '/imports/:importId',
    template: 'import',
    // held cells get a small release/discard form each
    hasForms: (view: ImportView) => view.quarantine.some((cell) => cell.status === 'held'),
    build: ({ params }) => {
      const text = params.importId;
      const importId = /^\d{1,12}$/.test(text) ? Number(text) : NaN;
      const row = Number.isSafeInteger(importId) ? readImportDetail(db, importId) : null;
      if (row === null) throw new AppError('IMPORT_NOT_FOUND', { importId: text.slice(0, 40) });
      const { reportJson, ...importRow } = row;
      return buildImportView({ row: importRow, reportJson, quarantine: readImportQuarantine(db, row.importId, MAX_LISTED_QUARANTINE) });
    },
  });
}
