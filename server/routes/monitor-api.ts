/** The monitor API: current flags (what the CLI prints), thresholds, refit jobs. */
import type { FastifyInstance, FastifyRequest } from 'fastify';
import { Type, type Static } from '@sinclair/typebox';
import { loadMonitorPanel } from '../../monitor/monitor-context.js';
import { refitStatus } from '../../monitor/panel-context.js';
import { checkThresholds } from '../../monitor/settings-page.js';
import { listCurrentFlagObjects } from '../../store/monitor-flags.js';
import { getRefitJob, latestRefitJob } from '../../store/monitor-jobs.js';
import { savePanelThresholds } from '../../store/monitor-settings.js';
import { AppError } from '../errors.js';
import { scheduleIfStale } from '../plugins/refit-service.js';
import { inPanel } from './panel-errors.js';

const PanelParams = Type.Object({ panel: Type.String({ minLength: 1, maxLength: 200 }) });
type PanelParams = Static<typeof PanelParams>;
const SinceQuery = Type.Object({ since: Type.Optional(Type.String({ minLength: 1, maxLength: 200 })) });
type SinceQuery = Static<typeof SinceQuery>;

export async function monitorApiRoutes(app: FastifyInstance): Promise<void> {
  const { db } = app;
  const panelOf = (request: FastifyRequest) => inPanel(() => loadMonitorPanel(db, (request.params as PanelParams).panel));

  app.get<{ Params: PanelParams; Querystring: SinceQuery }>(
    '/api/panels/:panel/flags',
    { schema: { params: PanelParams, querystring: SinceQuery } },
    async (request, reply) => {
      const { panel } = panelOf(request);
      scheduleIfStale(app, panel);
      const status = refitStatus(db, panel.id);
      let flags;
      try {
        flags = listCurrentFlagObjects(db, panel.name, request.query.since) ?? [];
      } catch (error) {
        if (error instanceof RangeError) throw new AppError('BAD_REQUEST', { detail: error.message });
        throw error;
      }
      // The body is exactly the array of flags (as the CLI prints); freshness goes in headers.
      reply.header('X-Flags-Built-At', status.flagsBuiltAt ?? 'never');
      reply.header('X-Flags-Stale', status.isStale ? 'true' : 'false');
      return reply.type('application/json; charset=utf-8').send(JSON.stringify(flags));
    },
  );

  app.get<{ Params: PanelParams }>('/api/panels/:panel/thresholds', { schema: { params: PanelParams } }, async (request) => {
    return { ok: true, thresholds: panelOf(request).thresholds };
  });

  app.put<{ Params: PanelParams }>('/api/panels/:panel/thresholds', { schema: { params: PanelParams } }, async (request, reply) => {
    const { panel } = panelOf(request);
    const { thresholds, problems } = checkThresholds(request.body);
    if (problems.length > 0) {
      return reply.code(422).send({
        ok: false,
        status: 422,
        code: 'BAD_REQUEST',
        error: 'The thresholds are not valid; nothing was saved.',
        errors: problems.map((p) => ({ message: p.message, column: p.path })),
      });
    }
    savePanelThresholds(db, panel.id, thresholds);
    const job = app.refitService.schedule(panel.name, 'thresholds changed');
    return { ok: true, thresholds, job };
  });

  app.get<{ Params: PanelParams }>('/api/panels/:panel/refit', { schema: { params: PanelParams } }, async (request) => {
    const { panel } = panelOf(request);
    return { ok: true, job: latestRefitJob(db, panel.id), status: refitStatus(db, panel.id) };
  });

  app.post<{ Params: PanelParams }>('/api/panels/:panel/refit', { schema: { params: PanelParams } }, async (request, reply) => {
    const { panel } = panelOf(request);
    const job = app.refitService.schedule(panel.name, 'requested');
    return reply.code(202).send({ ok: true, job, statusHref: `/api/panels/${encodeURIComponent(panel.name)}/refit/${job.id}` });
  });

  app.get<{ Params: PanelParams & { jobId: string } }>('/api/panels/:panel/refit/:jobId', async (request) => {
    const { panel } = panelOf(request);
    const job = getRefitJob(db, Number.parseInt(request.params.jobId, 10));
    if (!job || job.panelId !== panel.id) throw new AppError('NOT_FOUND', { path: request.url.split('?')[0].slice(0, 200) });
    return { ok: true, job };
  });
}
