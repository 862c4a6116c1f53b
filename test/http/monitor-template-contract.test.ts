/**
 * The monitor pages against their views, as test/http/template-contract.test.ts does for the other
 * pages: each monitor template is rendered in strict mode with the view its JSON twin returns, on
 * a small fitted panel with flags, a case, an event and a retraining record, so a template that
 * reads a field its view lacks fails here instead of printing nothing.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { resolveAppConfig } from '../../server/app.js';
import { createViewRenderer, type PageChrome } from '../../server/plugins/views.js';
import { findPanel } from '../../store/fits-sessions.js';
import { addPanelEvent, addRetraining } from '../../store/monitor-events.js';
import { listFlags } from '../../store/monitor-flags.js';
import { makeFittedTestApp, smallPanel } from '../monitor/helpers.js';
import type { TestApp } from './http-helpers.js';

const renderer = createViewRenderer(resolveAppConfig().templatesDir, { strict: true });
const chrome: PageChrome = {
  nav: [{ label: 'Panels', href: '/', isCurrent: true }],
  panel: 'p',
  panelNav: [{ label: 'Sessions', href: '/panels/p', isCurrent: false }],
  jsonHref: '/x.json',
  csrfToken: 'token',
  isTokenRequired: true,
  version: '0.0.0',
  refreshSeconds: null,
};

let t: TestApp;
const panel = smallPanel({ nWeeks: 10, nAssessors: 6, faults: [{ kind: 'lenient', assessor: 'A02', size: 2.5 }] });
const enc = encodeURIComponent(panel.panelName);

beforeAll(async () => {
  t = await makeFittedTestApp(panel);
}, 120_000);
afterAll(async () => t.close());

describe('monitor templates read only what their views hold', () => {
  it('renders every monitor page strictly from its JSON twin', async () => {
    const panelId = findPanel(t.db, panel.panelName)!.id;
    const sessions = panel.sessions.map((s) => s.label);
    addPanelEvent(t.db, panelId, { kind: 'note', assessor: 'A03', session: sessions[4], note: 'new batch of spoons' });
    addRetraining(t.db, panelId, { assessor: 'A02', status: 'planned', date: panel.sessions[5].date, note: 'scale anchors', flagKeys: [] });
    const flags = listFlags(t.db, panelId);
    expect(flags.length).toBeGreaterThan(0);
    const base = `/panels/${enc}/monitor`;
    const twins: [string, string][] = [
      ['monitor', `${base}.json`],
      ['monitor-review', `${base}/review.json`],
      ['monitor-case', `${base}/cases/${flags[0].flag.id}.json`],
      ['monitor-assessor', `${base}/assessors/A02.json`],
      ['monitor-control', `${base}/control.json`],
      ['monitor-products', `${base}/products.json`],
      ['monitor-flags', `${base}/flags.json`],
      ['monitor-retraining', `${base}/retraining.json`],
      ['monitor-events', `${base}/events.json`],
      ['monitor-settings', `${base}/settings.json`],
    ];
    const rendered = new Set<string>();
    for (const [page, url] of twins) {
      const response = await t.app.inject({ url });
      expect(response.statusCode, url).toBe(200);
      expect(() => renderer.render(page, response.json(), chrome), `${page} from ${url}`).not.toThrow();
      rendered.add(page);
    }
    const monitorPages = renderer.pageNames().filter((name) => name.startsWith('monitor'));
    expect(monitorPages.filter((name) => !rendered.has(name))).toEqual([]);
  }, 60_000);
});
