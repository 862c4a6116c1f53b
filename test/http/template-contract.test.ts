/**
 * Templates against their views: every page is rendered in strict mode with the view its JSON
 * twin returns (the twin is the view), so a template that reads a field the view does not have
 * fails here instead of silently printing nothing.
 */
import { describe, expect, it } from 'vitest';
import { resolveAppConfig } from '../../server/app.js';
import { createViewRenderer, type PageChrome } from '../../server/plugins/views.js';
import { freshApps, longCsv, postCsv, SMALL_SESSION_ROWS } from './http-helpers.js';

const fresh = freshApps();
const renderer = createViewRenderer(resolveAppConfig().templatesDir, { strict: true });
const chrome: PageChrome = {
  nav: [{ label: 'Panels', href: '/', isCurrent: true }],
  panel: 'oat',
  panelNav: [{ label: 'Sessions', href: '/panels/oat', isCurrent: false }],
  jsonHref: '/x.json',
  csrfToken: 'token',
  isTokenRequired: true,
  version: '0.0.0',
  refreshSeconds: null,
};

describe('templates read only what their views hold', () => {
  it('renders every page strictly from its JSON twin', async () => {
    const { app } = await fresh();
    const rows = SMALL_SESSION_ROWS.map((row) => [...row]);
    rows[1][6] = 12; // one quarantined cell, so the import page shows its quarantine table
    const quarantined = (await postCsv(app, 'oat', longCsv(rows), 'scaleMin=0&scaleMax=10&quarantine=true')).json();
    const rejectedRows = SMALL_SESSION_ROWS.map((row) => [...row]);
    rejectedRows[0][6] = 'x';
    const rejected = (await postCsv(app, 'oat', longCsv(rejectedRows))).json();
    const twins: [string, string][] = [
      ['home', '/.json'],
      ['panel', '/panels/oat.json'],
      ['session', '/panels/oat/sessions/W01.json'],
      ['imports', '/imports.json'],
      ['import', `/imports/${quarantined.importId}.json`],
      ['import', `/imports/${rejected.importId}.json`],
      ['upload', '/upload.json'],
      ['methods', '/methods.json'],
      // reports before any refit: every attribute says it has no stored model yet
      ['report-session', '/panels/oat/sessions/W01/report.json'],
      ['report-range', '/panels/oat/report.json'],
      ['report-feedback', '/panels/oat/assessors/A01/feedback.json'],
    ];
    const rendered = new Set<string>();
    for (const [page, url] of twins) {
      const view = (await app.inject({ url })).json();
      expect(() => renderer.render(page, view, chrome), `${page} from ${url}`).not.toThrow();
      rendered.add(page);
    }
    // pages without a twin: the upload result, sign-in, and the error page
    const uploadWithResult = { ...(await app.inject({ url: '/upload.json' })).json(), result: (await app.inject({ url: `/imports/${rejected.importId}.json` })).json().result };
    expect(() => renderer.render('upload', uploadWithResult, chrome)).not.toThrow();
    expect(() => renderer.render('upload', { ...uploadWithResult, result: null, failure: { message: 'm', errors: [{ message: 'e' }] } }, chrome)).not.toThrow();
    expect(() => renderer.render('login', { title: 'Sign in', breadcrumbs: [], next: '/', failure: null }, chrome)).not.toThrow();
    expect(() => renderer.render('error', { title: 'Not found', breadcrumbs: [], error: 'x', listedErrors: [] }, chrome)).not.toThrow();
    for (const page of ['login', 'error']) rendered.add(page);
    // The monitor pages need a fitted panel: test/http/monitor-template-contract.test.ts renders them.
    const ownPages = renderer.pageNames().filter((name) => !name.startsWith('monitor'));
    expect(ownPages.filter((name) => !rendered.has(name))).toEqual([]);
  });

  it('fails for a field the view lacks', () => {
    expect(() => renderer.render('panel', { title: 'x', breadcrumbs: [] }, chrome)).toThrow();
  });
});
