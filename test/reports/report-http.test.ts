/**
 * Report pages over HTTP on a small refitted panel: pages, JSON twins and CSV twins answer; the
 * pages render strictly from their twins; the feedback twin names no other assessor; an unknown
 * session is a 404; the session page links to its report.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { resolveAppConfig } from '../../server/app.js';
import { createViewRenderer, type PageChrome } from '../../server/plugins/views.js';
import type { TestApp } from '../http/http-helpers.js';
import { makeFittedTestApp, smallPanel } from '../monitor/helpers.js';

let t: TestApp;
const panel = smallPanel({ nWeeks: 4, nAssessors: 6, faults: [{ kind: 'lenient', assessor: 'A02', size: 2.5 }] });
const enc = encodeURIComponent(panel.panelName);
const sessions = [...new Set(panel.ratings.map((r) => r.session))].sort();

beforeAll(async () => {
  t = await makeFittedTestApp(panel);
}, 120_000);
afterAll(async () => t.close());

const chrome: PageChrome = { nav: [], panel: 'p', panelNav: [], jsonHref: '/x.json', csrfToken: null, isTokenRequired: false, version: '0', refreshSeconds: null };

describe('report pages', () => {
  it('the session report answers as HTML, JSON and three CSV tables, with a test and variance components per attribute', async () => {
    const base = `/panels/${enc}/sessions/${sessions[1]}/report`;
    const html = await t.app.inject({ url: base });
    expect(html.statusCode).toBe(200);
    expect(html.body).toContain('Product test');
    const json = (await t.app.inject({ url: `${base}.json` })).json();
    expect(json.attributes).toHaveLength(3);
    for (const a of json.attributes) {
      expect(a.productTest.F).toBeGreaterThan(0);
      expect(a.varianceShares.map((s: { key: string }) => s.key)).toEqual(['assessor', 'assessor:product', 'residual']);
    }
    expect(json.changes.previousSession).toBe(sessions[0]);
    for (const table of ['', '?table=means', '?table=indices']) {
      const csv = await t.app.inject({ url: `${base}.csv${table}` });
      expect(csv.statusCode).toBe(200);
      expect(csv.headers['content-type']).toContain('text/csv');
      expect(csv.body.split('\r\n').length).toBeGreaterThan(3);
    }
    const renderer = createViewRenderer(resolveAppConfig().templatesDir, { strict: true });
    expect(() => renderer.render('report-session', json, chrome)).not.toThrow();
  });

  it('the range report and the feedback sheet render strictly from their twins', async () => {
    const renderer = createViewRenderer(resolveAppConfig().templatesDir, { strict: true });
    const range = (await t.app.inject({ url: `/panels/${enc}/report.json?from=${sessions[0]}&to=${sessions[3]}` })).json();
    expect(range.nSessions).toBe(4);
    expect(() => renderer.render('report-range', range, chrome)).not.toThrow();
    const latest = (await t.app.inject({ url: `/panels/${enc}/report.json` })).json();
    expect(latest.to).toBe(sessions[3]);
    const feedback = await t.app.inject({ url: `/panels/${enc}/assessors/A02/feedback.json?from=${sessions[0]}&to=${sessions[3]}` });
    expect(feedback.statusCode).toBe(200);
    expect(() => renderer.render('report-feedback', feedback.json(), chrome)).not.toThrow();
    const others = ['A01', 'A03', 'A04', 'A05', 'A06'];
    for (const code of others) expect(feedback.body).not.toContain(code);
    const page = await t.app.inject({ url: `/panels/${enc}/assessors/A02/feedback?session=${sessions[2]}` });
    expect(page.statusCode).toBe(200);
    for (const code of others) expect(page.body).not.toContain(code);
    expect(feedback.json().measures.find((m: { key: string }) => m.key === 'level').rows.every((r: { words: string }) => r.words === 'higher than most of the panel')).toBe(true);
  });

  it('an unknown session or assessor is a 404; a reversed range is a 400', async () => {
    expect((await t.app.inject({ url: `/panels/${enc}/sessions/nope/report` })).statusCode).toBe(404);
    expect((await t.app.inject({ url: `/panels/${enc}/assessors/ZZ9/feedback` })).statusCode).toBe(404);
    expect((await t.app.inject({ url: `/panels/${enc}/report.json?from=${sessions[3]}&to=${sessions[0]}` })).statusCode).toBe(400);
  });

  it('the session page links to its report', async () => {
    const page = await t.app.inject({ url: `/panels/${enc}/sessions/${sessions[1]}` });
    expect(page.body).toContain(`/panels/${enc}/sessions/${sessions[1]}/report`);
  });
});
