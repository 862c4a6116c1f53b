/**
 * The JSON API: list panels, list a panel's imports, and import a file into a panel (multipart
 * field `file`, or the file as a text/csv or spreadsheet body with options in the query).
 */
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { Type, type Static } from '@sinclair/typebox';
import { buildImportsView } from '../../report/imports-view.js';
import { buildPanelsView } from '../../report/panels-view.js';
import { countImports, readImportRows } from '../../store/read-imports.js';
import { readPanelSummaries } from '../../store/read-panels.js';
import { AppError } from '../errors.js';
import { jsonView } from '../plugins/pages.js';
import { checkDeclaredLength, receiveMultipart, registerUploadParsers, type ReceivedFile, type UploadBody } from '../plugins/uploads.js';
import { checkPanelName, importAnswerBody, importStatus, parseImportOptions, readSettingsUpload, runImport } from './import-request.js';
import { requirePanel } from './panel-pages.js';

const PanelParams = Type.Object({ panel: Type.String({ minLength: 1, maxLength: 200 }) });
type PanelParams = Static<typeof PanelParams>;

const ImportQuery = Type.Object({
  fileName: Type.Optional(Type.String({ maxLength: 500 })),
  quarantine: Type.Optional(Type.String({ maxLength: 10 })),
  scaleMin: Type.Optional(Type.String({ maxLength: 40 })),
  scaleMax: Type.Optional(Type.String({ maxLength: 40 })),
  sheet: Type.Optional(Type.String({ maxLength: 500 })),
});
type ImportQuery = Static<typeof ImportQuery>;

const MAX_LISTED_IMPORTS = 500;

function isReceivedFile(body: unknown): body is ReceivedFile {
  return typeof body === 'object' && body !== null && typeof (body as ReceivedFile).path === 'string' && !('fields' in body);
}

export async function apiRoutes(app: FastifyInstance): Promise<void> {
  const { db } = app;
  await registerUploadParsers(app);

  app.get('/api/panels', async () => {
    const view = buildPanelsView(readPanelSummaries(db));
    return { ok: true, panels: view.panels, nPanels: view.nPanels };
  });

  app.get<{ Params: PanelParams }>('/api/panels/:panel/imports', { schema: { params: PanelParams } }, async (request) => {
    const panel = requirePanel(db, request.params.panel).name;
    return jsonView(
      buildImportsView({ panel, rows: readImportRows(db, { panelName: panel, limit: MAX_LISTED_IMPORTS }), nImportsTotal: countImports(db, panel) }),
    );
  });

  app.post<{ Params: PanelParams; Querystring: ImportQuery }>(
    '/api/panels/:panel/imports',
    {
      schema: { params: PanelParams, querystring: ImportQuery },
      onRequest: async (request) => checkDeclaredLength(request, app.appConfig.uploadLimitBytes),
      // A multipart form is read (file to disk) before validation so its fields can be checked.
      preValidation: async (request: FastifyRequest) => {
        if (request.isMultipart()) {
          request.body = await receiveMultipart(request, app.appConfig.uploadLimitBytes, app.uploadDir);
        }
      },
    },
    async (request, reply: FastifyReply) => {
      const panel = checkPanelName(request.params.panel);
      let file: ReceivedFile | null;
      let settingsFile: ReceivedFile | null = null;
      let optionSource: Record<string, unknown>;
      if (isReceivedFile(request.body)) {
        file = request.body;
        optionSource = request.query;
      } else if (request.isMultipart()) {
        const body = request.body as UploadBody;
        file = body.file;
        settingsFile = body.settingsFile;
        // Form fields win over query parameters of the same name.
        optionSource = { ...request.query, ...body.fields };
      } else if (request.body !== undefined && request.body !== null) {
        throw new AppError('UNSUPPORTED_MEDIA_TYPE'); // e.g. a JSON body
      } else {
        file = null;
        optionSource = request.query;
      }
      if (file === null) throw new AppError('UPLOAD_MISSING_FILE');
      const options = parseImportOptions(optionSource);
      const settings = settingsFile === null ? undefined : await readSettingsUpload(settingsFile);
      const report = await runImport(app, { panel, file, source: 'http', options, settings });
      return reply.code(importStatus(report)).send(importAnswerBody(report));
    },
  );
}
