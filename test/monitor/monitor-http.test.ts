/**
 * The monitor service: pages and their JSON twins carry the stored numbers, the flags API gives
 * exactly the stored flags, reviews and settings go through CSRF-protected forms, and a refit
 * requested over HTTP returns at once while the worker pool does the work.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Flag, FlagCase } from '../../domain/flags.js';
import { FLAG_KINDS } from '../../domain/flags.js';
import type { PeriodFitResult } from '../../domain/analysis.js';
import { findPanel } from '../../store/fits-sessions.js';
import { loadPeriodFits, loadSessionFits, loadSessionIndices } from '../../store/fits-results.js';
import { listFlags, replaceCurrentFlags, reviewFlag } from '../../store/monitor-flags.js';
import { listRetraining } from '../../store/monitor-events.js';
import { csrfFrom, makeTestApp, postCsv, type TestApp } from '../http/http-helpers.js';
import { toLongCsv } from '../../demo/generate-panel.js';
import { importRatings, makeFittedTestApp, smallPanel } from './helpers.js';

let t: TestApp;
const panel = smallPanel({ nWeeks: 10, nAssessors: 6, faults: [{ kind: 'lenient', assessor: 'A02', size: 2.5 }] });
const name = panel.panelName;
const enc = encodeURIComponent(name);

beforeAll(async () => {
  t = await makeFittedTestApp(panel);
}, 120_000);
afterAll(async () => t.close());

describe('flags API', () => {
  it('answers the current flags as an array of Flag objects with exactly the contract fields', async () => {
    const response = await t.app.inject({ url: `/api/panels/${enc}/flags` });
    expect(response.statusCode).toBe(200);
    expect(response.headers['x-flags-stale']).toBe('false');
    const flags = response.json() as FlagCase[];
    expect(Array.isArray(flags)).toBe(true);
    const panelId = findPanel(t.db, name)!.id;
    expect(flags).toEqual(listFlags(t.db, panelId).map((r) => r.flag));
    expect(flags.length).toBeGreaterThan(0);
    for (const f of flags) {
      // every field of the original contract, in its order, then the case fields
      expect(Object.keys(f)).toEqual(['kind', 'assessor', 'product', 'attribute', 'firstSession', 'severity', 'evidence', 'message', 'id', 'status', 'detectedSession', 'updatedSession']);
      expect(Number.isInteger((f as FlagCase).id)).toBe(true);
      expect(['open', 'dismissed', 'closed']).toContain((f as FlagCase).status);
      expect(FLAG_KINDS).toContain(f.kind);
      expect(['watch', 'act']).toContain(f.severity);
      expect(typeof f.evidence.n).toBe('number');
    }
    // The planted lenient assessor is among them.
    expect(flags.some((f) => f.kind === 'lenient' && f.assessor === 'A02')).toBe(true);
  });

  it('filters with ?since= by session order and rejects an unknown session', async () => {
    const panelId = findPanel(t.db, name)!.id;
    const since = panel.sessions[5].label;
    const response = await t.app.inject({ url: `/api/panels/${enc}/flags?since=${encodeURIComponent(since)}` });
    expect(response.json()).toEqual(listFlags(t.db, panelId, { sinceSession: since }).map((r) => r.flag));
    const bad = await t.app.inject({ url: `/api/panels/${enc}/flags?since=nope` });
    expect(bad.statusCode).toBe(400);
    expect(bad.json().ok).toBe(false);
  });

  it('answers 404 for an unknown panel', async () => {
    const response = await t.app.inject({ url: '/api/panels/none/flags' });
    expect(response.statusCode).toBe(404);
  });
});

describe('monitor pages', () => {
  it('overview: per-assessor sample sizes and flag counts, no ranking, the review notice', async () => {
    const html = await t.app.inject({ url: `/panels/${enc}/monitor` });
    expect(html.statusCode).toBe(200);
    expect(html.body).toContain('evidence for review, not verdicts');
    expect(html.body).toContain('not proof of good performance');
    expect(html.body).toContain('<svg');
    const json = (await t.app.inject({ url: `/panels/${enc}/monitor.json` })).json();
    expect(json.ok).toBe(true);
    const codes = json.assessors.map((a: { assessor: string }) => a.assessor);
    expect(codes).toEqual([...codes].sort());
    const indices = loadSessionIndices(t.db, findPanel(t.db, name)!.id);
    for (const a of json.assessors) {
      const own = indices.filter((ix) => ix.assessor === a.assessor);
      expect(a.nSessions).toBe(new Set(own.map((ix) => ix.session)).size);
      expect(a.nRatings).toBe(own.reduce((s, ix) => s + ix.nRatings, 0));
    }
    const openFlags = listFlags(t.db, findPanel(t.db, name)!.id, { status: 'open' }).map((r) => r.flag);
    const a02 = json.assessors.find((a: { assessor: string }) => a.assessor === 'A02');
    expect(a02.nAct).toBe(openFlags.filter((f) => f.assessor === 'A02' && f.severity === 'act').length);
  });

  it('assessor page: the level-offset series carries the stored offsets against the median of the other assessors', async () => {
    const attribute = panel.attributes[1].name;
    const url = `/panels/${enc}/monitor/assessors/A02`;
    const html = await t.app.inject({ url: `${url}?attribute=${encodeURIComponent(attribute)}` });
    expect(html.statusCode).toBe(200);
    expect(html.body).toContain('EWMA');
    const json = (await t.app.inject({ url: `${url}.json?attribute=${encodeURIComponent(attribute)}` })).json();
    expect(json.attribute).toBe(attribute);
    const level = json.measures.find((m: { key: string }) => m.key === 'level');
    const all = loadSessionIndices(t.db, findPanel(t.db, name)!.id).filter((ix) => ix.attribute === attribute);
    const stored = all.filter((ix) => ix.assessor === 'A02');
    const plotted = level.charts[0].series[0].points.map((p: { session: string; value: number }) => [p.session, p.value]);
    // The reference is the median of the other assessors' stored offsets in the same session.
    const medianOf = (xs: number[]) => {
      const s = [...xs].sort((a, b) => a - b);
      return s.length % 2 ? s[s.length >> 1] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
    };
    const expected = stored
      .filter((ix) => ix.offset !== null)
      .map((ix) => [ix.session, (ix.offset as number) - medianOf(all.filter((o) => o.session === ix.session && o.assessor !== 'A02' && o.offset !== null).map((o) => o.offset as number))]);
    expect(plotted.map(([session]: [string]) => session)).toEqual(expected.map(([session]) => session));
    plotted.forEach(([, value]: [string, number], i: number) => expect(value).toBeCloseTo(expected[i][1] as number, 10));
    expect(level.nValues).toBe(stored.filter((ix) => ix.offset !== null).length);
    // 10 sessions: fewer than the 20 wanted for final limits → provisional (dashed) limits.
    expect(json.summary.baselineStatus).toBe('provisional');
    expect(html.body).toContain('stroke-dasharray');
    expect(json.flags.some((f: { kind: string }) => f.kind === 'lenient')).toBe(true);
  });

  it('an unknown assessor is a 404', async () => {
    expect((await t.app.inject({ url: `/panels/${enc}/monitor/assessors/ZZ9` })).statusCode).toBe(404);
  });

  it('flags page filters by kind and severity; a flag is dismissed with a note through the CSRF form', async () => {
    const page = await t.app.inject({ url: `/panels/${enc}/monitor/flags?kind=lenient` });
    expect(page.statusCode).toBe(200);
    const json = (await t.app.inject({ url: `/panels/${enc}/monitor/flags.json?kind=lenient` })).json();
    expect(json.flags.every((f: { kind: string }) => f.kind === 'lenient')).toBe(true);
    const target = json.flags[0];
    const { token, cookie } = csrfFrom(page);
    const noToken = await t.app.inject({ method: 'POST', url: target.reviewAction, payload: { status: 'dismissed', note: 'x' }, headers: { cookie } });
    expect(noToken.statusCode).toBe(403);
    const dismissed = await t.app.inject({
      method: 'POST',
      url: target.reviewAction,
      headers: { cookie, 'content-type': 'application/x-www-form-urlencoded' },
      payload: new URLSearchParams({ _csrf: token, status: 'dismissed', note: 'Known: new panellist, in training.' }).toString(),
    });
    expect(dismissed.statusCode).toBe(303);
    const after = listFlags(t.db, findPanel(t.db, name)!.id).find((r) => r.id === target.id)!;
    expect(after.status).toBe('dismissed');
    expect(after.reviewNote).toBe('Known: new panellist, in training.');
  });

  it('settings: every threshold with its documentation; invalid input saves nothing (422)', async () => {
    const page = await t.app.inject({ url: `/panels/${enc}/monitor/settings` });
    expect(page.statusCode).toBe(200);
    const json = (await t.app.inject({ url: `/panels/${enc}/monitor/settings.json` })).json();
    const fields = json.groups.flatMap((g: { fields: unknown[] }) => g.fields);
    expect(fields.length).toBeGreaterThan(30);
    expect(fields.every((f: { description: string }) => f.description.length > 10)).toBe(true);
    const { token, cookie } = csrfFrom(page);
    const bad = await t.app.inject({
      method: 'POST',
      url: json.jsonAction,
      headers: { cookie, 'content-type': 'application/x-www-form-urlencoded' },
      payload: new URLSearchParams({ _csrf: token, json: '{"fdrLevel": 3}' }).toString(),
    });
    expect(bad.statusCode).toBe(422);
    expect(bad.body).toContain('fdrLevel');
    const api = await t.app.inject({ url: `/api/panels/${enc}/thresholds` });
    expect(api.json().thresholds.fdrLevel).toBe(0.05);

    // A valid change through the form field is saved (other fields keep their values) and rebuilds the flags.
    const form = new URLSearchParams({ _csrf: token });
    for (const f of fields as { path: string; value: number | boolean; kind: string }[]) {
      if (f.kind === 'boolean') form.append(f.path, String(f.value));
      else form.append(f.path, f.path === 'fdrLevel' ? '0.1' : String(f.value));
    }
    const saved = await t.app.inject({ method: 'POST', url: json.formAction, headers: { cookie, 'content-type': 'application/x-www-form-urlencoded' }, payload: form.toString() });
    expect(saved.statusCode).toBe(303);
    const after = (await t.app.inject({ url: `/api/panels/${enc}/thresholds` })).json().thresholds;
    expect(after.fdrLevel).toBe(0.1);
    expect(after.level).toEqual(api.json().thresholds.level);
    expect((await t.app.inject({ url: `/api/panels/${enc}/refit` })).json().job.reason).toBe('thresholds changed');
    await t.app.refitService.whenIdle();
  });
});

describe('background refit', () => {
  it('runs in the worker pool: the request returns while the job is queued, and its status is visible', async () => {
    expect(t.app.refitService.runnerMode).toBe('worker-threads');
    // Make the stored flags stale so the job has work (a rebuild of the flags).
    replaceCurrentFlags(t.db, findPanel(t.db, name)!.id, [], { dataSignature: 'outdated', thresholdsHash: 'outdated' });
    const started = await t.app.inject({ method: 'POST', url: `/api/panels/${enc}/refit` });
    expect(started.statusCode).toBe(202);
    const { job, statusHref } = started.json();
    expect(job.status).toBe('queued');
    let status = job.status;
    for (let i = 0; i < 600 && status !== 'done' && status !== 'failed'; i++) {
      await new Promise((resolve) => setTimeout(resolve, 100));
      status = (await t.app.inject({ url: statusHref })).json().job.status;
    }
    expect(status).toBe('done');
    const flags = (await t.app.inject({ url: `/api/panels/${enc}/flags` })).json();
    expect(flags.length).toBeGreaterThan(0);
  }, 90_000);
});

describe('product stability and control product pages', () => {
  it('product stability: the stored period fits and the session-wise effects of recurring products', async () => {
    const attribute = panel.attributes[0].name;
    const html = await t.app.inject({ url: `/panels/${enc}/monitor/products?attribute=${encodeURIComponent(attribute)}` });
    expect(html.statusCode).toBe(200);
    expect(html.body).toContain('Kendall');
    const json = (await t.app.inject({ url: `/panels/${enc}/monitor/products.json?attribute=${encodeURIComponent(attribute)}` })).json();
    const stored = loadPeriodFits(t.db, findPanel(t.db, name)!.id).filter((p) => p.attribute === attribute);
    expect(json.history.map((w: { lastSession: string }) => w.lastSession)).toEqual(stored.map((p) => p.lastSession));
    const latestStored = stored.at(-1)!.result as PeriodFitResult & { lrt: { likelihoodRatio: number; pValue: number } };
    const latestShown = json.latest.find((w: { attribute: string }) => w.attribute === attribute);
    expect(latestShown.productSessionVariance).toBe(latestStored.json.variance['product:session']);
    expect(latestShown.pValue).toBe(latestStored.lrt.pValue);
    // The demo serves the reference and recurring products every week: effects relative to the reference.
    expect(json.referenceProduct).not.toBeNull();
    expect(json.products.length).toBeGreaterThan(0);
    for (const p of json.products) {
      expect(p.relativeTo).toBe('reference');
      expect(p.nSessions).toBeGreaterThanOrEqual(json.minSessions);
      for (const e of p.effects) expect(e.ciLow).toBeLessThan(e.ciHigh);
    }
    expect(json.concordance.W).toBeGreaterThanOrEqual(0);
    expect(json.concordance.W).toBeLessThanOrEqual(1);
  });

  it('control product: panel mean per session equals the stored fit product mean', async () => {
    const attribute = panel.attributes[0].name;
    const json = (await t.app.inject({ url: `/panels/${enc}/monitor/control.json?attribute=${encodeURIComponent(attribute)}` })).json();
    expect(json.product).not.toBeNull();
    const fits = loadSessionFits(t.db, findPanel(t.db, name)!.id, attribute);
    const plotted = json.panelMean.charts[0].series[0].points.map((p: { session: string; value: number }) => [p.session, p.value]);
    expect(plotted).toEqual(fits.map((f) => [f.session, f.fit.productMeans.find((m) => m.product === json.product)!.mean]));
    expect(json.assessors.map((a: { assessor: string }) => a.assessor)).toEqual([...panel.assessors].sort());
  });
});

describe('retraining and events forms', () => {
  it('retraining list: open act flags grouped by assessor; recording a retraining links them', async () => {
    // Reopen what an earlier test dismissed, so the planted lenient flag is on the list.
    for (const r of listFlags(t.db, findPanel(t.db, name)!.id, { status: 'dismissed' })) reviewFlag(t.db, findPanel(t.db, name)!.id, r.id, 'open', 'reopened');
    const page = await t.app.inject({ url: `/panels/${enc}/monitor/retraining` });
    expect(page.statusCode).toBe(200);
    const json = (await t.app.inject({ url: `/panels/${enc}/monitor/retraining.json` })).json();
    const panelId = findPanel(t.db, name)!.id;
    const openAct = listFlags(t.db, panelId, { status: 'open', severity: 'act' }).filter((r) => r.flag.assessor !== null);
    expect(json.groups.map((g: { assessor: string }) => g.assessor)).toEqual([...new Set(openAct.map((r) => r.flag.assessor))].sort());
    expect(json.groups.length).toBeGreaterThan(0);
    const group = json.groups[0];
    const { token, cookie } = csrfFrom(page);
    const posted = await t.app.inject({
      method: 'POST',
      url: group.addAction,
      headers: { cookie, 'content-type': 'application/x-www-form-urlencoded' },
      payload: new URLSearchParams({ _csrf: token, assessor: group.assessor, status: 'planned', date: '2026-04-01', note: 'Reference tasting', flagKeys: group.flagKeysValue }).toString(),
    });
    expect(posted.statusCode).toBe(303);
    const record = listRetraining(t.db, panelId).find((r) => r.assessor === group.assessor)!;
    expect(record.status).toBe('planned');
    expect(record.flagKeys).toEqual(group.flags.map((f: { key: string }) => f.key).sort());
    const badDate = await t.app.inject({
      method: 'POST',
      url: group.addAction,
      headers: { cookie, 'content-type': 'application/x-www-form-urlencoded' },
      payload: new URLSearchParams({ _csrf: token, assessor: group.assessor, status: 'planned', date: 'next week' }).toString(),
    });
    expect(badDate.statusCode).toBe(400);
  });

  it('events: a new control batch is recorded and a refit is queued', async () => {
    const page = await t.app.inject({ url: `/panels/${enc}/monitor/events` });
    const { token, cookie } = csrfFrom(page);
    const session = panel.sessions[6].label;
    const posted = await t.app.inject({
      method: 'POST',
      url: `/panels/${enc}/monitor/events`,
      headers: { cookie, 'content-type': 'application/x-www-form-urlencoded' },
      payload: new URLSearchParams({ _csrf: token, kind: 'control-batch', session, assessor: '', note: 'Batch 2' }).toString(),
    });
    expect(posted.statusCode).toBe(303);
    const json = (await t.app.inject({ url: `/panels/${enc}/monitor/events.json` })).json();
    expect(json.events.map((e: { kind: string; session: string; assessor: string | null }) => [e.kind, e.session, e.assessor])).toEqual([['control-batch', session, null]]);
    const refit = (await t.app.inject({ url: `/api/panels/${enc}/refit` })).json();
    expect(refit.job.reason).toBe('event recorded');
    await t.app.refitService.whenIdle();
  }, 60_000);
});

describe('import through the service', () => {
  it('an import that changes sessions queues a refit; the fits are stored with the data versions', async () => {
    const other = await makeTestApp();
    try {
      const small = smallPanel({ nWeeks: 4, seed: 21 });
      const csv = toLongCsv(small);
      const imported = await postCsv(other.app, 'imported', csv);
      expect(imported.statusCode).toBeLessThan(300);
      const job = (await other.app.inject({ url: '/api/panels/imported/refit' })).json().job;
      expect(job.reason).toMatch(/^import/);
      await other.app.refitService.whenIdle();
      const panelId = findPanel(other.db, 'imported')!.id;
      const fits = loadSessionFits(other.db, panelId);
      expect(fits).toHaveLength(4 * small.attributes.length);
      expect(new Set(fits.map((f) => f.dataVersion))).toEqual(new Set([1]));
      expect((await other.app.inject({ url: '/api/panels/imported/refit' })).json().job.status).toBe('done');
      // The same file again changes nothing and queues nothing new.
      await postCsv(other.app, 'imported', csv);
      expect((await other.app.inject({ url: '/api/panels/imported/refit' })).json().job.id).toBe(job.id);
    } finally {
      await other.close();
    }
  }, 120_000);
});

describe('shutdown', () => {
  it('closing the service during a refit ends it as failed without waiting for every fit', async () => {
    const other = await makeTestApp();
    const big = smallPanel({ nWeeks: 12, seed: 33 });
    await importRatings(other.db, big);
    const job = other.app.refitService.schedule(big.panelName, 'test');
    await new Promise((resolve) => setTimeout(resolve, 200));
    const started = performance.now();
    await other.app.close();
    const closedMs = performance.now() - started;
    const status = other.app.refitService.job(job.id)!.status;
    other.db.close();
    // The refit (36 session fits, then 3 period fits of 12 sessions at 1–3 s each) was cut short.
    expect(status).toBe('failed');
    expect(closedMs).toBeLessThan(5000);
  }, 120_000);
});
