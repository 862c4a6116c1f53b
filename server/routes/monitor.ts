/**
 * Monitor pages, their JSON twins, the flags API and background refits.
 * Registered on the root instance (skip-override) so that `app.refitService` is visible to the
 * import routes, which schedule a refit after an import that changed sessions.
 */
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { Type, type Static } from '@sinclair/typebox';
import type { Database } from 'better-sqlite3';
import { PanelThresholdsSchema, validateThresholds } from '../../analysis/flags/index.js';
import { buildAssessorMonitorView } from '../../report/monitor-assessor-view.js';
import { monitorHref } from '../../report/monitor-common.js';
import { buildEventsView } from '../../report/monitor-events-view.js';
import { buildFlagsListView, buildRetrainingView, parseFlagFilter } from '../../report/monitor-flags-view.js';
import { buildMonitorOverviewView } from '../../report/monitor-overview-view.js';
import { buildSettingsView, type ThresholdFieldInput } from '../../report/monitor-settings-view.js';
import { buildProductStabilityView, type PeriodWindowInput, type RecurringProductInput } from '../../report/monitor-products-view.js';
import { buildControlProductView } from '../../report/monitor-control-view.js';
import { monitorSeries, type SeriesPoint } from '../../analysis/monitor/chart.js';
import { buildReferenceSeries, referencePeriodFor } from '../../analysis/monitor/series.js';
import { cochranQ, productRankConcordance } from '../../analysis/monitor/stability.js';
import { productEffectSeriesOf } from '../../analysis/flags/product-flags.js';
import { loadPeriodFits, loadSessionQuality } from '../../store/fits-results.js';
import type { StoredPeriodResult } from '../refit.js';
import { listAssessorCodes, listSessionVersions } from '../../store/fits-sessions.js';
import { getFlag, listCurrentFlagObjects, listFlags, reviewFlag } from '../../store/monitor-flags.js';
import { addPanelEvent, addRetraining, syncRetrainingEvents, deletePanelEvent, listPanelEvents, listRetraining, PANEL_EVENT_KINDS, updateRetraining, type PanelEventKind } from '../../store/monitor-events.js';
import { getRefitJob, failInterruptedRefitJobs, latestRefitJob } from '../../store/monitor-jobs.js';
import { savePanelThresholds } from '../../store/monitor-settings.js';
import { AppError } from '../errors.js';
import { createFitPool, type FitRunner } from '../fit-pool.js';
import { jsonView, registerPage, sendPage } from '../plugins/pages.js';
import { RefitService } from '../refit.js';
import { createHistoryMemo, derivedFromHistory, type HistoryMemo } from '../../monitor/panel-context.js';
import {
  assessorSampleSizes,
  chartDesigns,
  controlRestartSessions,
  loadMonitorContext,
  monitoredMeasures,
  monitoredSummary,
  panelThresholds,
  refitStatus,
  requireMonitorPanel,
} from './monitor-data.js';

declare module 'fastify' {
  interface FastifyInstance {
    /** Background refits; `schedule(panel, reason)` returns at once with the queued job. */
    refitService: RefitService;
    /** Panel histories kept between page requests, keyed by the data they are read from. */
    historyMemo: HistoryMemo;
  }
}

export interface MonitorRoutesOptions {
  /** The fit runner (default: a worker-thread pool); tests may pass an in-thread one. */
  runner?: FitRunner;
}

const PanelParams = Type.Object({ panel: Type.String({ minLength: 1, maxLength: 200 }) });
type PanelParams = Static<typeof PanelParams>;
const SinceQuery = Type.Object({ since: Type.Optional(Type.String({ minLength: 1, maxLength: 200 })) });
type SinceQuery = Static<typeof SinceQuery>;

const MAX_NOTE = 1000;

function text(body: unknown, field: string, maxLength = MAX_NOTE): string {
  const value = (body as Record<string, unknown> | undefined)?.[field];
  const last = Array.isArray(value) ? value[value.length - 1] : value;
  return typeof last === 'string' ? last.trim().slice(0, maxLength) : '';
}

function isIsoDate(value: string): boolean {
  return /^\d{4}-\d{2}-\d{2}$/.test(value) && !Number.isNaN(Date.parse(`${value}T00:00:00Z`));
}

/** Every leaf of the thresholds schema with its value, default and description. */
function thresholdFields(thresholds: unknown, defaults: unknown): ThresholdFieldInput[] {
  const out: ThresholdFieldInput[] = [];
  const walk = (schema: { properties?: Record<string, unknown> }, value: unknown, fallback: unknown, prefix: string) => {
    for (const [key, child] of Object.entries(schema.properties ?? {})) {
      const node = child as { type?: string; description?: string; properties?: Record<string, unknown> };
      const path = prefix ? `${prefix}.${key}` : key;
      const v = (value as Record<string, unknown>)[key];
      const d = (fallback as Record<string, unknown>)[key];
      if (node.type === 'object') walk(node, v, d, path);
      else {
        out.push({
          path,
          kind: node.type === 'boolean' ? 'boolean' : node.type === 'integer' ? 'integer' : 'number',
          value: v as number | boolean,
          defaultValue: d as number | boolean,
          description: node.description ?? '',
        });
      }
    }
  };
  walk(PanelThresholdsSchema as { properties?: Record<string, unknown> }, thresholds, defaults, '');
  return out;
}

/** Form fields (dotted names) back into a thresholds object; numbers parsed, booleans from "true". */
function thresholdsFromForm(body: unknown, fields: ThresholdFieldInput[]): Record<string, unknown> {
  const out: Record<string, unknown> = {};
  for (const field of fields) {
    const raw = text(body, field.path, 100);
    const value = field.kind === 'boolean' ? raw === 'true' : raw === '' ? Number.NaN : Number(raw);
    const parts = field.path.split('.');
    let node = out;
    for (const part of parts.slice(0, -1)) node = (node[part] ??= {}) as Record<string, unknown>;
    node[parts[parts.length - 1]] = value;
  }
  return out;
}

async function monitorRoutesPlugin(app: FastifyInstance, options: MonitorRoutesOptions): Promise<void> {
  const db: Database = app.db;
  const runner = options.runner ?? createFitPool();
  // A damaged store is read-only: no job bookkeeping, no background refits.
  if (app.storeHealth.ok) failInterruptedRefitJobs(db);
  const service = new RefitService(db, runner, {
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
  const memo = createHistoryMemo();
  app.decorate('historyMemo', memo);
  // Shutdown: stopping the pool rejects the fits still queued, so a long refit ends at once as
  // "failed" (its earlier results stay; the next start refits what is stale); then the store may close.
  app.addHook('onClose', async () => {
    await runner.close();
    await service.whenIdle();
  });
  app.navSections.push(
    { label: 'Review', scope: 'panel', href: (panel) => `${monitorHref(panel)}/review`, order: 39 },
    { label: 'Monitor', scope: 'panel', href: (panel) => monitorHref(panel), order: 40 },
    { label: 'Flags', scope: 'panel', href: (panel) => monitorHref(panel, 'flags'), order: 41 },
    { label: 'Retraining', scope: 'panel', href: (panel) => monitorHref(panel, 'retraining'), order: 42 },
    { label: 'Products', scope: 'panel', href: (panel) => monitorHref(panel, 'products'), order: 43 },
  );

  /** Pages read stored results; when they are older than the ratings, a refit is queued. */
  const scheduleIfStale = (panelName: string, panelId: number) => {
    if (!app.storeHealth.ok) return;
    const status = refitStatus(db, panelId);
    if (status.isStale && status.status !== 'queued' && status.status !== 'running') service.schedule(panelName, 'stale results');
  };

  /**
   * A page at a fixed path under the panel (HTML, with a CSRF token for its forms) and its
   * `.json` twin, both from the same view. (registerPage reads the format from a final path
   * parameter; these paths end in a fixed word.)
   */
  const registerFormPage = <View extends object>(url: string, template: string, build: (request: FastifyRequest) => View) => {
    app.get(url, async (request, reply) => {
      const queryStart = request.url.indexOf('?');
      const jsonHref = `${request.url.split('?')[0]}.json${queryStart === -1 ? '' : request.url.slice(queryStart)}`;
      return sendPage(app, request, reply, { template, view: build(request), jsonHref, withCsrf: true });
    });
    app.get(`${url}.json`, async (request, reply) => reply.type('application/json; charset=utf-8').send(jsonView(build(request))));
  };

  const back = (reply: FastifyReply, location: string) => reply.redirect(location, 303);

  // ---- overview ----
  registerFormPage('/panels/:panel/monitor', 'monitor', (request) => {
    const ctx = loadMonitorContext(db, (request.params as PanelParams).panel, { memo });
    scheduleIfStale(ctx.panel.name, ctx.panel.id);
    const { designs, baseline } = chartDesigns(ctx.thresholds, ctx.assessors.length, ctx.sizingMemo);
    const sizes = assessorSampleSizes(ctx.history);
    return buildMonitorOverviewView({
      panel: ctx.panel.name,
      sessions: ctx.history.sessions,
      nAttributes: ctx.attributes.length,
      // The summary charts change only with the data and the chart settings.
      assessors: derivedFromHistory(memo, ctx.history, `overview ${JSON.stringify(ctx.thresholds.charts)}`, () =>
        ctx.assessors.map((assessor) => ({
          assessor,
          ...(sizes.get(assessor) ?? { nSessions: 0, nRatings: 0 }),
          summary: monitoredSummary(ctx.history, assessor, designs, baseline, ctx.levelCharts()),
        })),
      ),
      openFlags: listFlags(db, ctx.panel.id, { status: 'open' }).map((r) => r.flag),
      events: ctx.history.events,
      designs,
      refit: refitStatus(db, ctx.panel.id),
    });
  });

  // ---- one assessor ----
  registerPage(app, {
    url: '/panels/:panel/monitor/assessors/:assessor',
    template: 'monitor-assessor',
    build: ({ params, query }) => {
      const ctx = loadMonitorContext(db, params.panel, { memo });
      if (!ctx.assessors.includes(params.assessor)) {
        throw new AppError('NOT_FOUND', { path: `${monitorHref(ctx.panel.name)}/assessors/${params.assessor}`.slice(0, 200) });
      }
      const requested = typeof query.attribute === 'string' ? query.attribute : null;
      const attribute = requested && ctx.attributes.includes(requested) ? requested : (ctx.attributes[0] ?? null);
      const summaryDesign = chartDesigns(ctx.thresholds, ctx.assessors.length, ctx.sizingMemo);
      const attributeDesign = chartDesigns(ctx.thresholds, ctx.assessors.length * Math.max(1, ctx.attributes.length), ctx.sizingMemo);
      return buildAssessorMonitorView({
        panel: ctx.panel.name,
        assessor: params.assessor,
        sessions: ctx.history.sessions,
        attributes: ctx.attributes,
        attribute,
        nSessions: assessorSampleSizes(ctx.history).get(params.assessor)?.nSessions ?? 0,
        summary: monitoredSummary(ctx.history, params.assessor, summaryDesign.designs, summaryDesign.baseline, ctx.levelCharts()),
        measures: attribute === null ? [] : monitoredMeasures(ctx.history, params.assessor, attribute, attributeDesign.designs, attributeDesign.baseline, ctx.levelCharts()),
        flags: listFlags(db, ctx.panel.id, { status: 'open', assessor: params.assessor }).map((r) => r.flag),
        events: ctx.history.events,
        // Per-attribute charts: limits sized for the assessor × attribute chart set; the summary charts use their own.
        designs: attributeDesign.designs,
      });
    },
  });

  // ---- product stability ----
  /** sessionProductEffects' default confidence level (analysis/monitor/stability.ts). */
  const CONF_LEVEL = 0.95;
  registerFormPage('/panels/:panel/monitor/products', 'monitor-products', (request) => {
    const ctx = loadMonitorContext(db, (request.params as PanelParams).panel, { memo });
    const requested = (request.query as { attribute?: string }).attribute;
    const attribute = requested && ctx.attributes.includes(requested) ? requested : (ctx.attributes[0] ?? null);
    const windows: PeriodWindowInput[] = loadPeriodFits(db, ctx.panel.id)
      .sort((a, b) => ctx.history.sessions.findIndex((s) => s.label === a.lastSession) - ctx.history.sessions.findIndex((s) => s.label === b.lastSession))
      .map((p) => {
        const result = p.result as StoredPeriodResult;
        const fitted = 'problem' in result ? null : result;
        return {
          attribute: p.attribute,
          firstSession: p.firstSession,
          lastSession: p.lastSession,
          nSessions: p.sessions.length,
          productSessionVariance: fitted ? (fitted.json.variance['product:session'] ?? null) : null,
          likelihoodRatio: fitted?.lrt?.likelihoodRatio ?? null,
          pValue: fitted?.lrt?.pValue ?? null,
          problem: 'problem' in result ? result.problem : null,
        };
      });
    const results = ctx.history.results.filter((r) => r.attribute === attribute);
    // The flag engine's own effect series (same reference-product choice as the step detector).
    const effectSeries = productEffectSeriesOf(ctx.history, ctx.thresholds).filter((p) => p.attribute === attribute);
    const referenceProduct = effectSeries[0]?.referenceProduct ?? null;
    const minSessions = ctx.thresholds.productStability.minSessions;
    const recurring: RecurringProductInput[] = effectSeries
      .filter((p) => p.effects.length >= minSessions)
      .map((p) => ({
        product: p.product,
        relativeTo: p.relativeTo,
        effects: p.effects.map((e) => ({ session: e.session, effect: e.effect, ciLow: e.ciLow, ciHigh: e.ciHigh, df: e.df })),
        cochran: cochranQ(p.effects),
      }));
    const latestWindow = windows.filter((w) => w.attribute === attribute).at(-1);
    const windowResults = latestWindow
      ? results.slice(results.findIndex((r) => r.session === latestWindow.firstSession), results.findIndex((r) => r.session === latestWindow.lastSession) + 1)
      : results;
    const concordance = productRankConcordance(windowResults);
    // The session fits of this attribute that could not be made (stored as the session's findings by the refit).
    const notFitted = loadSessionQuality(db, ctx.panel.id).flatMap((q) =>
      (q.findings as { attribute?: string; message?: string }[])
        .filter((f) => f.attribute === attribute && typeof f.message === 'string')
        .map((f) => ({ session: q.session, reason: f.message! })),
    );
    return buildProductStabilityView({
      notFitted,
      panel: ctx.panel.name,
      attributes: ctx.attributes,
      attribute,
      sessions: ctx.history.sessions.map((s) => s.label),
      windows,
      referenceProduct,
      recurring,
      minSessions,
      concordance: concordance && {
        W: concordance.W,
        chiSquare: concordance.chiSquare,
        df: concordance.df,
        pValue: concordance.pValue,
        products: concordance.products,
        sessions: concordance.sessions,
      },
      confLevel: CONF_LEVEL,
      flags: listFlags(db, ctx.panel.id, { kind: 'unstable-product' })
        .filter((r) => r.flag.attribute === attribute || r.flag.attribute === null)
        .map((r) => r.flag),
    });
  });

  // ---- control (reference) product ----
  registerFormPage('/panels/:panel/monitor/control', 'monitor-control', (request) => {
    const ctx = loadMonitorContext(db, (request.params as PanelParams).panel, { withRatings: true, memo });
    const requested = (request.query as { attribute?: string }).attribute;
    const attribute = requested && ctx.attributes.includes(requested) ? requested : (ctx.attributes[0] ?? null);
    const product = ctx.history.referenceProducts[0] ?? null;
    const series = buildReferenceSeries(ctx.history).find((s) => s.product === product && s.attribute === attribute);
    const { designs, baseline } = chartDesigns(ctx.thresholds, ctx.assessors.length, ctx.sizingMemo);
    const monitored = (points: SeriesPoint[], assessor: string | null) => {
      const options = {
        baseline,
        restartSessions: controlRestartSessions(ctx.history, assessor),
        referenceSessions: referencePeriodFor(ctx.history, assessor)?.sessions ?? null,
      };
      return { series: points, segments: monitorSeries(points, designs, options) };
    };
    return buildControlProductView({
      panel: ctx.panel.name,
      product,
      attributes: ctx.attributes,
      attribute,
      sessions: ctx.history.sessions.map((s) => s.label),
      panelMean: series ? monitored(series.panelMean, null) : null,
      assessors: series ? series.assessorDeviation.map((d) => ({ assessor: d.assessor, ...monitored(d.points, d.assessor) })) : [],
      events: ctx.history.events,
      designs,
    });
  });

  // ---- flags list and review ----
  registerFormPage('/panels/:panel/monitor/flags', 'monitor-flags', (request) => {
    const { panel: name } = request.params as PanelParams;
    const panel = requireMonitorPanel(db, name);
    return buildFlagsListView({
      panel: panel.name,
      records: listFlags(db, panel.id),
      filter: parseFlagFilter(request.query as Record<string, string>),
    });
  });

  app.post<{ Params: PanelParams & { flagId: string } }>(
    '/panels/:panel/monitor/flags/:flagId/review',
    { preHandler: app.csrfProtection },
    async (request, reply) => {
      const panel = requireMonitorPanel(db, request.params.panel);
      const flagId = Number.parseInt(request.params.flagId, 10);
      const status = text(request.body, 'status');
      const note = text(request.body, 'note');
      if (status !== 'dismissed' && status !== 'open') throw new AppError('BAD_REQUEST', { detail: 'the review status must be "dismissed" or "open".' });
      if (status === 'dismissed' && note === '') throw new AppError('BAD_REQUEST', { detail: 'dismissing a flag needs a note saying why.' });
      if (!Number.isInteger(flagId) || !getFlag(db, panel.id, flagId)) throw new AppError('NOT_FOUND', { path: request.url.slice(0, 200) });
      reviewFlag(db, panel.id, flagId, status, note, new Date().toISOString(), text(request.body, 'reviewedBy', 200));
      if (text(request.body, 'back') === 'case') return back(reply, `${monitorHref(panel.name)}/cases/${flagId}`);
      return back(reply, `${monitorHref(panel.name, 'flags')}#flag-${flagId}`);
    },
  );

  // ---- retraining ----
  registerFormPage('/panels/:panel/monitor/retraining', 'monitor-retraining', (request) => {
    const panel = requireMonitorPanel(db, (request.params as PanelParams).panel);
    return buildRetrainingView({ panel: panel.name, records: listFlags(db, panel.id), retraining: listRetraining(db, panel.id) });
  });

  app.post<{ Params: PanelParams }>('/panels/:panel/monitor/retraining', { preHandler: app.csrfProtection }, async (request, reply) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    const assessor = text(request.body, 'assessor', 200);
    const status = text(request.body, 'status');
    const date = text(request.body, 'date', 20);
    if (assessor === '') throw new AppError('BAD_REQUEST', { detail: 'the assessor is missing.' });
    if (status !== 'planned' && status !== 'done') throw new AppError('BAD_REQUEST', { detail: 'the retraining status must be "planned" or "done".' });
    if (!isIsoDate(date)) throw new AppError('BAD_REQUEST', { detail: 'the date must be a calendar date (YYYY-MM-DD).' });
    const flagKeys = text(request.body, 'flagKeys', 100_000).split('\n').map((k) => k.trim()).filter(Boolean);
    addRetraining(db, panel.id, { assessor, status, date, note: text(request.body, 'note'), flagKeys });
    // The record done is also the event that restarts the assessor's chart baselines.
    syncRetrainingEvents(db, panel.id);
    if (status === 'done') service.schedule(panel.name, 'retraining recorded');
    return back(reply, monitorHref(panel.name, 'retraining'));
  });

  app.post<{ Params: PanelParams & { id: string } }>('/panels/:panel/monitor/retraining/:id', { preHandler: app.csrfProtection }, async (request, reply) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    const status = text(request.body, 'status');
    const date = text(request.body, 'date', 20);
    if (status !== 'planned' && status !== 'done') throw new AppError('BAD_REQUEST', { detail: 'the retraining status must be "planned" or "done".' });
    if (date !== '' && !isIsoDate(date)) throw new AppError('BAD_REQUEST', { detail: 'the date must be a calendar date (YYYY-MM-DD).' });
    const found = updateRetraining(db, panel.id, Number.parseInt(request.params.id, 10), { status, date: date || undefined });
    if (!found) throw new AppError('NOT_FOUND', { path: request.url.slice(0, 200) });
    syncRetrainingEvents(db, panel.id);
    service.schedule(panel.name, 'retraining recorded');
    return back(reply, monitorHref(panel.name, 'retraining'));
  });

  // ---- events ----
  registerFormPage('/panels/:panel/monitor/events', 'monitor-events', (request) => {
    const panel = requireMonitorPanel(db, (request.params as PanelParams).panel);
    const ctx = loadMonitorContext(db, panel.name, { memo });
    return buildEventsView({
      panel: panel.name,
      events: listPanelEvents(db, panel.id),
      sessions: ctx.history.sessions.map((s) => s.label),
      // From the store, not the fitted indices: events can be marked before the first refit.
      assessors: listAssessorCodes(db, panel.id),
      minReferenceSessions: ctx.thresholds.charts.minBaselineSessions,
    });
  });

  app.post<{ Params: PanelParams }>('/panels/:panel/monitor/events', { preHandler: app.csrfProtection }, async (request, reply) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    const kind = text(request.body, 'kind') as PanelEventKind;
    const session = text(request.body, 'session', 200);
    const until = text(request.body, 'until', 200);
    const assessor = text(request.body, 'assessor', 200);
    if (!PANEL_EVENT_KINDS.includes(kind)) throw new AppError('BAD_REQUEST', { detail: 'the event must be retraining, control-batch, note or reference-period.' });
    const labels = listSessionVersions(db, panel.id).map((s) => s.label);
    const from = labels.indexOf(session);
    if (from < 0) throw new AppError('BAD_REQUEST', { detail: 'choose a session of this panel.' });
    let untilSession: string | null = null;
    if (kind === 'reference-period') {
      const to = labels.indexOf(until);
      if (to < 0) throw new AppError('BAD_REQUEST', { detail: 'a reference period needs an "until" session of this panel.' });
      if (to < from) throw new AppError('BAD_REQUEST', { detail: `the reference period must end at or after ${session}.` });
      const minimum = panelThresholds(db, panel.id).charts.minBaselineSessions;
      if (to - from + 1 < minimum) throw new AppError('BAD_REQUEST', { detail: `a reference period must span at least ${minimum} sessions (the minimum baseline); ${session} to ${until} spans ${to - from + 1}.` });
      untilSession = until;
    }
    addPanelEvent(db, panel.id, { kind, session, untilSession, assessor: assessor === '' ? null : assessor, note: text(request.body, 'note') });
    service.schedule(panel.name, 'event recorded');
    return back(reply, monitorHref(panel.name, 'events'));
  });

  app.post<{ Params: PanelParams & { id: string } }>('/panels/:panel/monitor/events/:id/delete', { preHandler: app.csrfProtection }, async (request, reply) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    if (!deletePanelEvent(db, panel.id, Number.parseInt(request.params.id, 10))) throw new AppError('NOT_FOUND', { path: request.url.slice(0, 200) });
    service.schedule(panel.name, 'event removed');
    return back(reply, monitorHref(panel.name, 'events'));
  });

  // ---- thresholds ----
  const settingsView = (panelName: string, panelId: number, problems: { path: string; message: string }[], saved: boolean) => {
    const thresholds = panelThresholds(db, panelId);
    const defaults = validateThresholds({}).thresholds;
    return buildSettingsView({ panel: panelName, fields: thresholdFields(thresholds, defaults), thresholds, problems, saved });
  };

  registerFormPage('/panels/:panel/monitor/settings', 'monitor-settings', (request) => {
    const panel = requireMonitorPanel(db, (request.params as PanelParams).panel);
    return settingsView(panel.name, panel.id, [], (request.query as { saved?: string }).saved === '1');
  });

  const saveThresholds = (request: FastifyRequest, reply: FastifyReply, panelName: string, panelId: number, given: unknown) => {
    const { thresholds, problems } = validateThresholds(given);
    if (problems.length > 0) {
      // Nothing saved: the page shows the thresholds still in force and what was wrong.
      return sendPage(app, request, reply, {
        template: 'monitor-settings',
        view: settingsView(panelName, panelId, problems, false),
        jsonHref: null,
        withCsrf: true,
        status: 422,
      });
    }
    savePanelThresholds(db, panelId, thresholds);
    service.schedule(panelName, 'thresholds changed');
    return back(reply, `${monitorHref(panelName, 'settings')}?saved=1`);
  };

  app.post<{ Params: PanelParams }>('/panels/:panel/monitor/settings', { preHandler: app.csrfProtection }, async (request, reply) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    const fields = thresholdFields(panelThresholds(db, panel.id), validateThresholds({}).thresholds);
    return saveThresholds(request, reply, panel.name, panel.id, thresholdsFromForm(request.body, fields));
  });

  app.post<{ Params: PanelParams }>('/panels/:panel/monitor/settings/json', { preHandler: app.csrfProtection }, async (request, reply) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    let given: unknown;
    try {
      given = JSON.parse(text(request.body, 'json', 64 * 1024));
    } catch {
      given = null; // validateThresholds says "must be a JSON object"
    }
    return saveThresholds(request, reply, panel.name, panel.id, given);
  });

  // ---- API ----
  app.get<{ Params: PanelParams; Querystring: SinceQuery }>(
    '/api/panels/:panel/flags',
    { schema: { params: PanelParams, querystring: SinceQuery } },
    async (request, reply) => {
      const panel = requireMonitorPanel(db, request.params.panel);
      scheduleIfStale(panel.name, panel.id);
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
    const panel = requireMonitorPanel(db, request.params.panel);
    return { ok: true, thresholds: panelThresholds(db, panel.id) };
  });

  app.put<{ Params: PanelParams }>('/api/panels/:panel/thresholds', { schema: { params: PanelParams } }, async (request, reply) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    const { thresholds, problems } = validateThresholds(request.body);
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
    const job = service.schedule(panel.name, 'thresholds changed');
    return { ok: true, thresholds, job };
  });

  app.get<{ Params: PanelParams }>('/api/panels/:panel/refit', { schema: { params: PanelParams } }, async (request) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    return { ok: true, job: latestRefitJob(db, panel.id), status: refitStatus(db, panel.id) };
  });

  app.post<{ Params: PanelParams }>('/api/panels/:panel/refit', { schema: { params: PanelParams } }, async (request, reply) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    const job = service.schedule(panel.name, 'requested');
    return reply.code(202).send({ ok: true, job, statusHref: `/api/panels/${encodeURIComponent(panel.name)}/refit/${job.id}` });
  });

  app.get<{ Params: PanelParams & { jobId: string } }>('/api/panels/:panel/refit/:jobId', async (request) => {
    const panel = requireMonitorPanel(db, request.params.panel);
    const job = getRefitJob(db, Number.parseInt(request.params.jobId, 10));
    if (!job || job.panelId !== panel.id) throw new AppError('NOT_FOUND', { path: request.url.split('?')[0].slice(0, 200) });
    return { ok: true, job };
  });
}

// Decorations (refitService) and the onClose hook belong to the root instance.
(monitorRoutesPlugin as unknown as Record<symbol, boolean>)[Symbol.for('skip-override')] = true;

export const monitorRoutes = monitorRoutesPlugin;
