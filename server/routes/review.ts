/** The weekly review page of a panel and one case's page, with their JSON twins (monitor/ builds them). */
import type { FastifyInstance } from 'fastify';
import { buildCasePage, CaseNotFound } from '../../monitor/case-page.js';
import { loadPanelContext, type PanelContext } from '../../monitor/panel-context.js';
import { buildReviewPage } from '../../monitor/review-page.js';
import { AppError } from '../errors.js';
import { registerPage } from '../plugins/pages.js';
import { inPanel } from './panel-errors.js';

export async function reviewRoutes(app: FastifyInstance): Promise<void> {
  const context = (panel: string): PanelContext => {
    const ctx = inPanel(() => loadPanelContext(app.db, panel, app.historyMemo));
    if (ctx.refit.isStale && ctx.refit.status !== 'queued' && ctx.refit.status !== 'running') {
      const job = app.refitService.schedule(ctx.panel.name, 'stale results');
      return { ...ctx, refit: { ...ctx.refit, status: job.status, nDone: job.nDone, nTasks: job.nTasks } };
    }
    return ctx;
  };
  registerPage(app, { url: '/panels/:panel/monitor/review', template: 'monitor-review', build: ({ request }) => buildReviewPage(context((request.params as { panel: string }).panel)) });
  registerPage(app, {
    url: '/panels/:panel/monitor/cases/:caseId',
    template: 'monitor-case',
    hasForms: () => true,
    build: ({ params, request }) => {
      try {
        return buildCasePage(context(params.panel), { caseId: params.caseId });
      } catch (error) {
        if (error instanceof CaseNotFound) throw new AppError('NOT_FOUND', { path: request.url.split('?')[0].slice(0, 200) });
        throw error;
      }
    },
  });
}
