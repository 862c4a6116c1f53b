/**
 * Background refits for the service: the fit pool, the RefitService that runs one refit job at a
 * time, and the panel histories kept between page requests. Registered by buildApp on the root
 * instance before the route modules, so every route (imports, quarantine, monitor pages) reaches
 * `app.refitService` and `app.historyMemo`, typed.
 */
import type { FastifyInstance } from 'fastify';
import { createHistoryMemo, refitStatus, type HistoryMemo } from '../../monitor/panel-context.js';
import { monitorHref } from '../../report/monitor-common.js';
import { failInterruptedRefitJobs } from '../../store/monitor-jobs.js';
import { createFitPool, type FitRunner } from '../fit-pool.js';
import { RefitService } from '../refit.js';

declare module 'fastify' {
  interface FastifyInstance {
    /** Background refits; `schedule(panel, reason)` returns at once with the queued job. */
    refitService: RefitService;
    /** Panel histories kept between page requests, keyed by the data they are read from. */
    historyMemo: HistoryMemo;
  }
}

export interface RefitServiceOptions {
  /** The fit runner (default: a worker-thread pool); tests may pass an in-thread one. */
  runner?: FitRunner;
}

export function registerRefitService(app: FastifyInstance, options: RefitServiceOptions = {}): void {
  const runner = options.runner ?? createFitPool();
  // A damaged store is read-only: no job bookkeeping, no background refits.
  if (app.storeHealth.ok) failInterruptedRefitJobs(app.db);
  const service = new RefitService(app.db, runner, {
    onError: (error, job) => app.log.error({ err: error, jobId: job.id }, 'refit failed'),
    logger: app.log,
    // The pages that compute most from a fresh refit (overview, control product, review) are
    // requested once here, so their memoised parts are ready before the panel leader's first visit.
    afterRefit: async (panelName) => {
      const token = app.appConfig.accessToken;
      const headers = token === null ? {} : { authorization: `Bearer ${token}` };
      for (const url of [`${monitorHref(panelName)}.json`, `${monitorHref(panelName, 'control')}.json`, `${monitorHref(panelName)}/review.json`]) {
        await app.inject({ method: 'GET', url, headers });
      }
    },
  });
  app.decorate('refitService', service);
  app.decorate('historyMemo', createHistoryMemo());
  // Shutdown: stopping the pool rejects the fits still queued, so a long refit ends at once as
  // "failed" (its earlier results stay; the next start refits what is stale); then the store may close.
  app.addHook('onClose', async () => {
    await runner.close();
    await service.whenIdle();
  });
}

/** Pages read stored results; when they are older than the ratings, a refit is queued. */
export function scheduleIfStale(app: FastifyInstance, panel: { name: string; id: number }): void {
  if (!app.storeHealth.ok) return;
  const status = refitStatus(app.db, panel.id);
  if (status.isStale && status.status !== 'queued' && status.status !== 'running') app.refitService.schedule(panel.name, 'stale results');
}
