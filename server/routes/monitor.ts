/**
 * Monitor pages and their JSON twins. monitor/ builds every view from the loaded panel context;
 * these routes only read the request and answer.
 */
import type { FastifyInstance, FastifyRequest } from 'fastify';
import { buildAssessorPage } from '../../monitor/assessor-page.js';
import { buildControlPage } from '../../monitor/control-page.js';
import { buildEventsPage } from '../../monitor/events-page.js';
import { buildFlagsPage } from '../../monitor/flags-page.js';
import { loadMonitorContext, loadMonitorPanel, type MonitorPanel } from '../../monitor/monitor-context.js';
import { buildOverviewPage } from '../../monitor/overview-page.js';
import { buildProductsPage } from '../../monitor/products-page.js';
import { buildRetrainingPage } from '../../monitor/retraining-page.js';
import { buildSettingsPage } from '../../monitor/settings-page.js';
import { monitorHref } from '../../report/monitor-common.js';
import { jsonView, registerPage, sendPage } from '../plugins/pages.js';
import { scheduleIfStale } from '../plugins/refit-service.js';
import { inPanel } from './panel-errors.js';

type Query = Record<string, string>;

export async function monitorRoutes(app: FastifyInstance): Promise<void> {
  app.navSections.push(
    { label: 'Review', scope: 'panel', href: (panel) => `${monitorHref(panel)}/review`, order: 39 },
    { label: 'Monitor', scope: 'panel', href: (panel) => monitorHref(panel), order: 40 },
    { label: 'Flags', scope: 'panel', href: (panel) => monitorHref(panel, 'flags'), order: 41 },
    { label: 'Retraining', scope: 'panel', href: (panel) => monitorHref(panel, 'retraining'), order: 42 },
    { label: 'Products', scope: 'panel', href: (panel) => monitorHref(panel, 'products'), order: 43 },
  );
  const panelOf = (request: FastifyRequest): MonitorPanel => loadMonitorPanel(app.db, (request.params as { panel: string }).panel);
  const contextOf = (request: FastifyRequest, options: { withRatings?: boolean } = {}) =>
    loadMonitorContext(app.db, (request.params as { panel: string }).panel, app.historyMemo, options);

  /**
   * A page at a fixed path under the panel (HTML, with a CSRF token for its forms) and its
   * `.json` twin, both from the same view. (registerPage reads the format from a final path
   * parameter; these paths end in a fixed word.)
   */
  const registerFormPage = <View extends object>(url: string, template: string, build: (request: FastifyRequest) => View) => {
    app.get(url, async (request, reply) => {
      const queryStart = request.url.indexOf('?');
      const jsonHref = `${request.url.split('?')[0]}.json${queryStart === -1 ? '' : request.url.slice(queryStart)}`;
      return sendPage(app, request, reply, { template, view: inPanel(() => build(request)), jsonHref, withCsrf: true });
    });
    app.get(`${url}.json`, async (request, reply) => reply.type('application/json; charset=utf-8').send(jsonView(inPanel(() => build(request)))));
  };

  registerFormPage('/panels/:panel/monitor', 'monitor', (request) => {
    const ctx = contextOf(request);
    scheduleIfStale(app, ctx.panel);
    return buildOverviewPage(ctx);
  });
  registerPage(app, {
    url: '/panels/:panel/monitor/assessors/:assessor',
    template: 'monitor-assessor',
    build: ({ params, query, request }) => inPanel(() => buildAssessorPage(contextOf(request), { assessor: params.assessor, attribute: query.attribute })),
  });
  const attributeOf = (request: FastifyRequest) => (request.query as Query).attribute;
  registerFormPage('/panels/:panel/monitor/products', 'monitor-products', (request) => buildProductsPage(contextOf(request), { attribute: attributeOf(request) }));
  registerFormPage('/panels/:panel/monitor/control', 'monitor-control', (request) =>
    buildControlPage(contextOf(request, { withRatings: true }), { attribute: attributeOf(request) }),
  );
  registerFormPage('/panels/:panel/monitor/flags', 'monitor-flags', (request) => buildFlagsPage(panelOf(request), { query: request.query as Query }));
  registerFormPage('/panels/:panel/monitor/retraining', 'monitor-retraining', (request) => buildRetrainingPage(panelOf(request)));
  registerFormPage('/panels/:panel/monitor/events', 'monitor-events', (request) => buildEventsPage(panelOf(request)));
  registerFormPage('/panels/:panel/monitor/settings', 'monitor-settings', (request) =>
    buildSettingsPage(panelOf(request), { saved: (request.query as Query).saved === '1' }),
  );
}
