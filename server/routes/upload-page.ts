/**
 * The upload page: a form (panel, file, scale, sheet, quarantine) that posts back to itself and
 * shows the person the same result the API gives (counts, findings, problems with file, row and
 * column). CSRF-protected: the form carries a token tied to a cookie.
 */
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { buildImportResultView } from '../../report/import-result-view.js';
import { buildUploadView, type UploadFormValues } from '../../report/upload-view.js';
import { readPanelSummaries } from '../../store/read-panels.js';
import { AppError, formatBytes, toAppError } from '../errors.js';
import { jsonView, sendPage } from '../plugins/pages.js';
import { checkDeclaredLength, receiveMultipart, registerUploadParsers, type UploadBody } from '../plugins/uploads.js';
import { checkPanelName, importStatus, parseImportOptions, readSettingsUpload, runImport } from './import-request.js';

function formValues(fields: Record<string, string>): UploadFormValues {
  return {
    panel: (fields.panel ?? '').slice(0, 200),
    scaleMin: (fields.scaleMin ?? '').slice(0, 40),
    scaleMax: (fields.scaleMax ?? '').slice(0, 40),
    sheet: (fields.sheet ?? '').slice(0, 200),
    quarantine: ['on', 'true', '1', 'yes'].includes((fields.quarantine ?? '').toLowerCase()),
  };
}

export async function uploadPageRoutes(app: FastifyInstance): Promise<void> {
  const { db } = app;
  const limitText = formatBytes(app.appConfig.uploadLimitBytes);
  await registerUploadParsers(app);

  const panelNames = () => readPanelSummaries(db).map((panel) => panel.name);

  app.get('/upload', async (request, reply) => {
    const query = request.query as Record<string, unknown>;
    const view = buildUploadView({ panelNames: panelNames(), uploadLimitText: limitText, form: { panel: typeof query.panel === 'string' ? query.panel.slice(0, 200) : '' } });
    return sendPage(app, request, reply, { template: 'upload', view, jsonHref: '/upload.json', withCsrf: true });
  });

  app.get('/upload.json', async () => jsonView(buildUploadView({ panelNames: panelNames(), uploadLimitText: limitText })));

  app.post(
    '/upload',
    {
      onRequest: async (request) => checkDeclaredLength(request, app.appConfig.uploadLimitBytes),
      preValidation: async (request: FastifyRequest) => {
        if (!request.isMultipart()) throw new AppError('UNSUPPORTED_MEDIA_TYPE');
        request.body = await receiveMultipart(request, app.appConfig.uploadLimitBytes, app.uploadDir);
      },
      preHandler: app.csrfProtection,
    },
    async (request: FastifyRequest, reply: FastifyReply) => {
      const body = request.body as UploadBody;
      const form = formValues(body.fields);
      const answerPage = (status: number, parts: Parameters<typeof buildUploadView>[0]) =>
        sendPage(app, request, reply, { template: 'upload', view: buildUploadView(parts), jsonHref: '/upload.json', withCsrf: true, status });
      try {
        const panel = checkPanelName(body.fields.panel);
        if (body.file === null) throw new AppError('UPLOAD_MISSING_FILE');
        const options = parseImportOptions(body.fields);
        const settings = body.settingsFile === null ? undefined : await readSettingsUpload(body.settingsFile);
        const report = await runImport(app, { panel, file: body.file, source: 'web', options, settings });
        return answerPage(importStatus(report), {
          form,
          panelNames: panelNames(),
          uploadLimitText: limitText,
          result: buildImportResultView(report),
        });
      } catch (error) {
        const appError = toAppError(error, { uploadLimitBytes: app.appConfig.uploadLimitBytes, path: '/upload', method: 'POST' });
        if (appError.status >= 500) throw error;
        return answerPage(appError.status, {
          form,
          panelNames: panelNames(),
          uploadLimitText: limitText,
          failure: {
            message: appError.message,
            errors: appError.errors
              .filter((item) => item.message !== appError.message)
              .map((item) => ({ message: item.column ? `${item.column}: ${item.message}` : item.message })),
          },
        });
      }
    },
  );
}
