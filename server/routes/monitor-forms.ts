/**
 * The forms of the monitor pages: reviewing a flag case, recording retraining and events, saving
 * thresholds. Each reads the form, lets the store (or monitor/, for what needs checking) do the
 * work, queues a refit where the results change, and redirects back to the page.
 */
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { eventFromForm } from '../../monitor/events-page.js';
import { loadMonitorPanel, type MonitorPanel } from '../../monitor/monitor-context.js';
import { buildSettingsPage, checkThresholds, thresholdsFromForm } from '../../monitor/settings-page.js';
import { monitorHref } from '../../report/monitor-common.js';
import { addPanelEvent, addRetraining, deletePanelEvent, syncRetrainingEvents, updateRetraining } from '../../store/monitor-events.js';
import { getFlag, reviewFlag } from '../../store/monitor-flags.js';
import { savePanelThresholds } from '../../store/monitor-settings.js';
import { AppError } from '../errors.js';
import { sendPage } from '../plugins/pages.js';
import { inPanel } from './panel-errors.js';

const MAX_NOTE = 1000;

/** A form field, trimmed and cut to maxLength ('' when missing; the last value when sent twice). */
function text(body: unknown, field: string, maxLength = MAX_NOTE): string {
  const value = (body as Record<string, unknown> | undefined)?.[field];
  const last = Array.isArray(value) ? value[value.length - 1] : value;
  return typeof last === 'string' ? last.trim().slice(0, maxLength) : '';
}

function isIsoDate(value: string): boolean {
  return /^\d{4}-\d{2}-\d{2}$/.test(value) && !Number.isNaN(Date.parse(`${value}T00:00:00Z`));
}

function retrainingStatus(body: unknown): 'planned' | 'done' {
  const status = text(body, 'status');
  if (status !== 'planned' && status !== 'done') throw new AppError('BAD_REQUEST', { detail: 'the retraining status must be "planned" or "done".' });
  return status;
}

const back = (reply: FastifyReply, location: string) => reply.redirect(location, 303);

export async function monitorFormRoutes(app: FastifyInstance): Promise<void> {
  const { db } = app;
  const panelOf = (request: FastifyRequest): MonitorPanel => inPanel(() => loadMonitorPanel(db, (request.params as { panel: string }).panel));
  const post = (url: string, handle: (request: FastifyRequest, reply: FastifyReply, ctx: MonitorPanel) => unknown) =>
    app.post(url, { preHandler: app.csrfProtection }, async (request, reply) => handle(request, reply, panelOf(request)));
  const idOf = (request: FastifyRequest, name: string) => Number.parseInt((request.params as Record<string, string>)[name], 10);
  const notFound = (request: FastifyRequest) => new AppError('NOT_FOUND', { path: request.url.slice(0, 200) });

  post('/panels/:panel/monitor/flags/:flagId/review', async (request, reply, { panel }) => {
    const flagId = idOf(request, 'flagId');
    const status = text(request.body, 'status');
    const note = text(request.body, 'note');
    if (status !== 'dismissed' && status !== 'open') throw new AppError('BAD_REQUEST', { detail: 'the review status must be "dismissed" or "open".' });
    if (status === 'dismissed' && note === '') throw new AppError('BAD_REQUEST', { detail: 'dismissing a flag needs a note saying why.' });
    if (!Number.isInteger(flagId) || !getFlag(db, panel.id, flagId)) throw notFound(request);
    reviewFlag(db, panel.id, flagId, status, note, new Date().toISOString(), text(request.body, 'reviewedBy', 200));
    if (text(request.body, 'back') === 'case') return back(reply, `${monitorHref(panel.name)}/cases/${flagId}`);
    return back(reply, `${monitorHref(panel.name, 'flags')}#flag-${flagId}`);
  });

  post('/panels/:panel/monitor/retraining', async (request, reply, { panel }) => {
    const assessor = text(request.body, 'assessor', 200);
    if (assessor === '') throw new AppError('BAD_REQUEST', { detail: 'the assessor is missing.' });
    const status = retrainingStatus(request.body);
    const date = text(request.body, 'date', 20);
    if (!isIsoDate(date)) throw new AppError('BAD_REQUEST', { detail: 'the date must be a calendar date (YYYY-MM-DD).' });
    const flagKeys = text(request.body, 'flagKeys', 100_000).split('\n').map((k) => k.trim()).filter(Boolean);
    addRetraining(db, panel.id, { assessor, status, date, note: text(request.body, 'note'), flagKeys });
    // The record done is also the event that restarts the assessor's chart baselines.
    syncRetrainingEvents(db, panel.id);
    if (status === 'done') app.refitService.schedule(panel.name, 'retraining recorded');
    return back(reply, monitorHref(panel.name, 'retraining'));
  });

  post('/panels/:panel/monitor/retraining/:id', async (request, reply, { panel }) => {
    const status = retrainingStatus(request.body);
    const date = text(request.body, 'date', 20);
    if (date !== '' && !isIsoDate(date)) throw new AppError('BAD_REQUEST', { detail: 'the date must be a calendar date (YYYY-MM-DD).' });
    if (!updateRetraining(db, panel.id, idOf(request, 'id'), { status, date: date || undefined })) throw notFound(request);
    syncRetrainingEvents(db, panel.id);
    app.refitService.schedule(panel.name, 'retraining recorded');
    return back(reply, monitorHref(panel.name, 'retraining'));
  });

  post('/panels/:panel/monitor/events', async (request, reply, ctx) => {
    const field = (name: string, maxLength?: number) => text(request.body, name, maxLength);
    const form = { kind: field('kind'), session: field('session', 200), until: field('until', 200), assessor: field('assessor', 200), note: field('note') };
    addPanelEvent(db, ctx.panel.id, inPanel(() => eventFromForm(ctx, form)));
    app.refitService.schedule(ctx.panel.name, 'event recorded');
    return back(reply, monitorHref(ctx.panel.name, 'events'));
  });

  post('/panels/:panel/monitor/events/:id/delete', async (request, reply, { panel }) => {
    if (!deletePanelEvent(db, panel.id, idOf(request, 'id'))) throw notFound(request);
    app.refitService.schedule(panel.name, 'event removed');
    return back(reply, monitorHref(panel.name, 'events'));
  });

  const saveThresholds = (request: FastifyRequest, reply: FastifyReply, ctx: MonitorPanel, given: unknown) => {
    const { thresholds, problems } = checkThresholds(given);
    if (problems.length > 0) {
      // Nothing saved: the page shows the thresholds still in force and what was wrong.
      const view = buildSettingsPage(ctx, { saved: false, problems });
      return sendPage(app, request, reply, { template: 'monitor-settings', view, jsonHref: null, withCsrf: true, status: 422 });
    }
    savePanelThresholds(db, ctx.panel.id, thresholds);
    app.refitService.schedule(ctx.panel.name, 'thresholds changed');
    return back(reply, `${monitorHref(ctx.panel.name, 'settings')}?saved=1`);
  };

  post('/panels/:panel/monitor/settings', async (request, reply, ctx) =>
    saveThresholds(request, reply, ctx, thresholdsFromForm(ctx, (name) => text(request.body, name, 100))),
  );

  post('/panels/:panel/monitor/settings/json', async (request, reply, ctx) => {
    let given: unknown;
    try {
      given = JSON.parse(text(request.body, 'json', 64 * 1024));
    } catch {
      given = null; // checkThresholds says "must be a JSON object"
    }
    return saveThresholds(request, reply, ctx, given);
  });
}
