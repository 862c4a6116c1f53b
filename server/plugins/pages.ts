/**
 * Pages and their JSON twins. `registerPage` adds one GET route that answers the HTML page at
 * its path and the same view as JSON at the path plus `.json` (and, where a page offers one, a
 * CSV download at the path plus `.csv`). Both come from the same `build` call, so the numbers
 * in the page and in its twin cannot disagree.
 */
import { validateHeaderName, validateHeaderValue } from 'node:http';
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { AppError, type ErrorBody } from '../errors.js';
import { wantsJson } from './security.js';
import { buildNav } from './views.js';

export type PageFormat = 'html' | 'json' | 'csv';

export interface PageRequest {
  /** Route parameters, URL-decoded, with the `.json`/`.csv` suffix removed. */
  params: Record<string, string>;
  query: Record<string, unknown>;
  request: FastifyRequest;
}

export interface CsvDownload {
  fileName: string;
  /** Already CSV text (formula-like cells neutralised by the builder). */
  text: string;
}

export interface PageOptions<View extends object> {
  /** Route path; when it ends with a parameter, the suffix is read from that parameter. */
  url: string;
  /** templates/pages/NAME.hbs */
  template: string;
  build: (page: PageRequest) => View | Promise<View>;
  /** Optional CSV download of the same data. */
  csv?: (page: PageRequest) => CsvDownload | Promise<CsvDownload>;
  /** Whether the HTML page holds forms (and so needs a CSRF token). */
  hasForms?: (view: View) => boolean;
}

/** Sends an HTML page: the view plus navigation, JSON link and (for forms) a CSRF token. */
export function sendPage(
  app: FastifyInstance,
  request: FastifyRequest,
  reply: FastifyReply,
  options: { template: string; view: object; jsonHref: string | null; withCsrf?: boolean; status?: number },
): FastifyReply {
  const view = options.view as { panel?: unknown; refreshSeconds?: unknown };
  const panel = typeof view.panel === 'string' ? view.panel : null;
  const { nav, panelNav } = buildNav(app.navSections, panel, request.url);
  const html = app.views.render(options.template, options.view, {
    nav,
    panel,
    panelNav,
    jsonHref: options.jsonHref,
    csrfToken: options.withCsrf ? reply.generateCsrf() : null,
    isTokenRequired: app.appConfig.accessToken !== null,
    version: app.appConfig.version,
    refreshSeconds: typeof view.refreshSeconds === 'number' ? view.refreshSeconds : null,
  });
  if (options.jsonHref !== null) reply.header('Link', `<${options.jsonHref}>; rel="alternate"; type="application/json"`);
  return reply
    .code(options.status ?? 200)
    .type('text/html; charset=utf-8')
    .send(html);
}

/** The JSON twin's body: the view itself, marked ok. */
export function jsonView(view: object): object {
  return { ok: true, ...view };
}

function splitSuffix(value: string, allowCsv: boolean): { base: string; format: PageFormat } {
  if (value.endsWith('.json')) return { base: value.slice(0, -'.json'.length), format: 'json' };
  if (allowCsv && value.endsWith('.csv')) return { base: value.slice(0, -'.csv'.length), format: 'csv' };
  return { base: value, format: 'html' };
}

function withQuery(path: string, request: FastifyRequest): string {
  const queryStart = request.url.indexOf('?');
  return queryStart === -1 ? path : path + request.url.slice(queryStart);
}

export function registerPage<View extends object>(app: FastifyInstance, options: PageOptions<View>): void {
  const lastParam = /\/:(\w+)$/.exec(options.url)?.[1] ?? null;

  const answer = async (request: FastifyRequest, reply: FastifyReply, format: PageFormat, params: Record<string, string>) => {
    const page: PageRequest = { params, query: (request.query ?? {}) as Record<string, unknown>, request };
    if (format === 'csv' && options.csv) {
      const download = await options.csv(page);
      const asciiName = download.fileName.replace(/[^A-Za-z0-9._-]/g, '_');
      return reply
        .type('text/csv; charset=utf-8')
        .header('Content-Disposition', `attachment; filename="${asciiName}"; filename*=UTF-8''${encodeURIComponent(download.fileName)}`)
        .send(download.text);
    }
    const view = await options.build(page);
    if (format === 'json') return reply.type('application/json; charset=utf-8').send(jsonView(view));
    const path = request.url.split('?')[0];
    const jsonPath = path === '/' ? '/.json' : `${path}.json`;
    return sendPage(app, request, reply, {
      template: options.template,
      view,
      jsonHref: withQuery(jsonPath, request),
      withCsrf: options.hasForms?.(view) ?? false,
    });
  };

  if (lastParam === null) {
    const jsonUrls = options.url === '/' ? ['/.json', '/index.json'] : [`${options.url}.json`];
    // Parameters before a fixed last segment (e.g. /panels/:panel/report) are passed on as they are.
    const paramsOf = (request: FastifyRequest) => ({ ...(request.params as Record<string, string>) });
    app.get(options.url, (request, reply) => answer(request, reply, 'html', paramsOf(request)));
    for (const url of jsonUrls) app.get(url, (request, reply) => answer(request, reply, 'json', paramsOf(request)));
    if (options.csv) app.get(`${options.url}.csv`, (request, reply) => answer(request, reply, 'csv', paramsOf(request)));
    return;
  }

  app.get(options.url, async (request, reply) => {
    const params = { ...(request.params as Record<string, string>) };
    const { base, format } = splitSuffix(params[lastParam], options.csv !== undefined);
    if (format === 'html') return answer(request, reply, 'html', params);
    try {
      return await answer(request, reply, format, { ...params, [lastParam]: base });
    } catch (error) {
      // A name that itself ends in ".json" (say a panel called "trial.json") still has its page.
      if (!(error instanceof AppError) || error.status !== 404) throw error;
      try {
        return await answer(request, reply, 'html', params);
      } catch {
        throw error; // the twin's own "not found" is the answer
      }
    }
  });
}

function isSendable(name: string, value: unknown): boolean {
  try {
    validateHeaderName(name);
    for (const item of Array.isArray(value) ? value : [value]) validateHeaderValue(name, item);
    return true;
  } catch {
    return false;
  }
}

/**
 * An error answer never redirects, and never carries a header Node cannot send (say a Location
 * built from an address with a line feed): left in place, such a header would make the error
 * answer fail too, and fastify would send its own bare body instead of the app's error shape.
 */
function clearHeadersForError(reply: FastifyReply): void {
  reply.removeHeader('location');
  for (const [name, value] of Object.entries(reply.getHeaders())) {
    if (!isSendable(name, value)) reply.removeHeader(name);
  }
}

/** Sends an error as JSON (API, twins, JSON clients) or as an HTML page. */
export function sendError(app: FastifyInstance, request: FastifyRequest, reply: FastifyReply, error: AppError): FastifyReply {
  clearHeadersForError(reply);
  const body: ErrorBody = error.toBody();
  if (wantsJson(request)) return reply.code(error.status).type('application/json; charset=utf-8').send(body);
  try {
    return sendPage(app, request, reply, {
      template: 'error',
      view: { title: error.status === 404 ? 'Not found' : 'Could not do that', breadcrumbs: [], error: body.error, listedErrors: error.errors },
      jsonHref: null,
      status: error.status,
    });
  } catch {
    return reply.code(error.status).type('text/plain; charset=utf-8').send(body.error);
  }
}
