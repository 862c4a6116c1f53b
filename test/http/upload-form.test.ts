/** The upload page: a CSRF-protected form whose answer shows the same result as the API. */
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { csrfFrom, formData, longCsv, makeTestApp, SMALL_SESSION_ROWS, type TestApp } from './http-helpers.js';

let t: TestApp;
beforeEach(async () => {
  t = await makeTestApp();
});
afterEach(async () => {
  await t.close();
});

async function openForm() {
  const page = await t.app.inject({ url: '/upload' });
  expect(page.statusCode).toBe(200);
  return csrfFrom(page);
}

describe('upload page', () => {
  it('has a form with every option and a JSON twin', async () => {
    const page = await t.app.inject({ url: '/upload' });
    for (const name of ['_csrf', 'panel', 'file', 'scaleMin', 'scaleMax', 'sheet', 'quarantine']) {
      expect(page.body).toContain(`name="${name}"`);
    }
    expect(page.body).toContain('enctype="multipart/form-data"');
    const json = (await t.app.inject({ url: '/upload.json' })).json();
    expect(json).toMatchObject({ ok: true, title: 'Upload ratings', uploadLimitText: '50 MB', result: null });
  });

  it('imports a file sent through the form and shows the counts', async () => {
    const { token, cookie } = await openForm();
    const response = await t.app.inject({
      method: 'POST',
      url: '/upload',
      headers: { cookie },
      payload: formData({ _csrf: token, panel: 'oat', scaleMin: '0', scaleMax: '10' }, { name: 'week-01.csv', content: longCsv(SMALL_SESSION_ROWS) }),
    });
    expect(response.statusCode).toBe(200);
    expect(response.body).toContain('Imported');
    expect(response.body).toMatch(/Valid ratings read<\/th><td class="num">7<\/td>/);
    expect(response.body).toContain('href="/panels/oat/sessions/W01"');
    const imports = (await t.app.inject({ url: '/imports.json' })).json();
    expect(imports.imports[0]).toMatchObject({ source: 'web', fileName: 'week-01.csv', nRatings: 7 });
  });

  it('shows the problems of a rejected file by file, row and column, and keeps the form values', async () => {
    const { token, cookie } = await openForm();
    const rows = SMALL_SESSION_ROWS.map((row) => [...row]);
    rows[2][6] = 'n/a';
    const response = await t.app.inject({
      method: 'POST',
      url: '/upload',
      headers: { cookie },
      payload: formData({ _csrf: token, panel: 'oat', scaleMin: '0', scaleMax: '10', quarantine: '' }, { name: 'bad.csv', content: longCsv(rows) }),
    });
    expect(response.statusCode).toBe(422);
    expect(response.body).toContain('Rejected: nothing was written');
    expect(response.body).toMatch(/<td>bad\.csv<\/td>\s*<td class="num">4<\/td>\s*<td>value<\/td>/);
    expect(response.body).toContain('value="oat"');
    expect(response.body).toMatch(/name="_csrf" value="[^"]+"/); // a fresh form to try again
    // The panel was new, so nothing (not even the panel) was stored: no link to a page that does not exist.
    expect(response.body).toContain('(not stored: a rejected import creates no panel)');
    expect(response.body).not.toContain('href="/panels/oat"');
    expect((await t.app.inject({ url: '/panels/oat' })).statusCode).toBe(404);
  });

  it('shows a clear message when no file was chosen', async () => {
    const { token, cookie } = await openForm();
    const form = formData({ _csrf: token, panel: 'oat' });
    form.append('file', new Blob([]), ''); // what a browser sends for an empty file field
    const response = await t.app.inject({ method: 'POST', url: '/upload', headers: { cookie }, payload: form });
    expect(response.statusCode).toBe(400);
    expect(response.body).toContain('No file was sent.');
  });

  it('refuses a post without a valid CSRF token', async () => {
    const { cookie } = await openForm();
    const payload = () => formData({ panel: 'oat', scaleMin: '0', scaleMax: '10' }, { name: 'a.csv', content: longCsv(SMALL_SESSION_ROWS) });
    const noToken = await t.app.inject({ method: 'POST', url: '/upload', headers: { cookie }, payload: payload() });
    expect(noToken.statusCode).toBe(403);
    expect(noToken.body).toContain('The form had expired');
    const forged = formData({ _csrf: 'forged-token', panel: 'oat' }, { name: 'a.csv', content: 'x' });
    const wrong = await t.app.inject({ method: 'POST', url: '/upload', headers: { cookie }, payload: forged });
    expect(wrong.statusCode).toBe(403);
    const noCookie = await t.app.inject({ method: 'POST', url: '/upload', payload: payload() });
    expect(noCookie.statusCode).toBe(403);
    expect((await t.app.inject({ url: '/api/panels' })).json().nPanels).toBe(0);
  });
});
