/**
 * The methods page: docs/methods.md served at /methods with its JSON twin, every numbered heading
 * an anchor, every "§" link on it pointing to an anchor that exists, and threshold descriptions
 * on the settings page rendered with working links (the helper escapes the text around them).
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { resolveAppConfig } from '../../server/app.js';
import { createViewRenderer } from '../../server/plugins/views.js';
import { methodsHeadings, sectionAnchor } from '../../report/methods-references.js';
import { packageRoot } from '../../store/package-root.js';
import { freshApps } from './http-helpers.js';

const fresh = freshApps();
const markdown = readFileSync(join(packageRoot(), 'docs', 'methods.md'), 'utf8');

describe('the methods page', () => {
  it('serves every numbered section with its anchor, and links resolve within the page', async () => {
    const { app } = await fresh();
    const response = await app.inject({ url: '/methods' });
    expect(response.statusCode).toBe(200);
    const html = response.body;
    const ids = new Set([...html.matchAll(/ id="([^"]+)"/g)].map((m) => m[1]));
    for (const heading of methodsHeadings(markdown)) expect(ids.has(sectionAnchor(heading.section)), heading.section).toBe(true);
    const links = [...html.matchAll(/href="\/methods#([^"]+)"/g)].map((m) => m[1]);
    expect(links.length).toBeGreaterThan(20);
    expect(links.filter((id) => !ids.has(id))).toEqual([]);
    expect(html).toContain('Chart limits with an estimated baseline');
    expect(html).not.toMatch(/\*\*|```/); // Markdown markers do not leak into the page
    expect(html).toContain('href="/methods"'); // in the site navigation
  });

  it('has a JSON twin holding the same blocks', async () => {
    const { app } = await fresh();
    const twin = (await app.inject({ url: '/methods.json' })).json();
    expect(twin.ok).toBe(true);
    expect(twin.title).toContain('statistical methods');
    expect(twin.contents.map((c: { href: string }) => c.href)).toContain('#s3');
    expect(twin.blocks.some((b: { kind: string; id?: string }) => b.kind === 'heading' && b.id === 's3-7a')).toBe(true);
  });

  it('links "§" in threshold descriptions and escapes the rest', () => {
    const renderer = createViewRenderer(resolveAppConfig().templatesDir);
    const view = {
      title: 'Thresholds',
      breadcrumbs: [],
      panel: 'oat',
      groups: [{ name: 'level', fields: [{ path: 'level.x', name: 'x', kind: 'number', value: 1, defaultValue: 1, isChanged: false, isBoolean: false, isChecked: false, step: 'any', description: 'Size <b> guard, methods §6.3 (CP).' }] }],
      problems: [],
      thresholdsJson: '{}',
      saved: false,
      formAction: '/x',
      jsonAction: '/y',
      apiHref: '/z',
    };
    const chrome = { nav: [], panel: 'oat', panelNav: [], jsonHref: null, csrfToken: 't', isTokenRequired: false, version: '0', refreshSeconds: null };
    const html = renderer.render('monitor-settings', view, chrome);
    expect(html).toContain('Size &lt;b&gt; guard, methods <a href="/methods#s6-3">§6.3</a> (CP).');
  });
});
