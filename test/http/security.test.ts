/**
 * Security: headers, output escaping of hostile names, CSV formula neutralisation, the access
 * token off loopback, host and cross-site checks, and error answers without internals.
 */
import { describe, expect, it } from 'vitest';
import { buildApp } from '../../server/app.js';
import { ERROR_REGISTRY } from '../../server/errors.js';
import { isLoopbackHost } from '../../server/plugins/security.js';
import { openStore } from '../../store/open-store.js';
import { csrfFrom, freshApps, longCsv, makeTestApp, postCsv, quotedLongCsv } from './http-helpers.js';

const fresh = freshApps();

const SCRIPT = '<script>alert(1)</script>';
const TOKEN = 'a-test-token-of-enough-length-0123';

describe('security headers', () => {
  it('sends a strict content security policy and the usual protections on every page', async () => {
    const { app } = await fresh();
    for (const url of ['/', '/upload', '/.json', '/nothing-here']) {
      const response = await app.inject({ url });
      const csp = String(response.headers['content-security-policy']);
      expect(csp, url).toContain("script-src 'none'");
      expect(csp).toContain("default-src 'self'");
      expect(csp).toContain("frame-ancestors 'none'");
      expect(csp).toContain("form-action 'self'");
      expect(response.headers['x-content-type-options']).toBe('nosniff');
      expect(response.headers['x-frame-options']).toBe('SAMEORIGIN');
      expect(response.headers['referrer-policy']).toBe('same-origin');
    }
  });

  it('has no inline script or style in any page', async () => {
    const { app } = await fresh();
    await postCsv(app, 'oat', longCsv([['W01', '2026-01-05', 'A01', 'P1', 1, 'sweetness', 3]]));
    for (const url of ['/', '/panels/oat', '/panels/oat/sessions/W01', '/imports', '/imports/1', '/upload']) {
      const body = (await app.inject({ url })).body;
      expect(body, url).not.toMatch(/<script|\sstyle=|\son[a-z]+=/i);
    }
  });
});

describe('output escaping', () => {
  it('shows script-like panel, session, assessor, product and attribute names as text', async () => {
    const { app } = await fresh();
    const panel = `p${SCRIPT}`;
    const rows = [[`S${SCRIPT}`, '2026-01-05', `A${SCRIPT}`, `P"'${SCRIPT}`, 1, `attr${SCRIPT}`, 4]];
    const answer = await postCsv(app, panel, quotedLongCsv(rows));
    expect(answer.statusCode, answer.body).toBe(200);
    const sessionHref = `/panels/${encodeURIComponent(panel)}/sessions/${encodeURIComponent(`S${SCRIPT}`)}`;
    const pages = ['/', `/panels/${encodeURIComponent(panel)}`, sessionHref, '/imports', `/imports/${answer.json().importId}`, '/upload'];
    for (const url of pages) {
      const response = await app.inject({ url });
      expect(response.statusCode, url).toBe(200);
      expect(response.body, url).not.toContain('<script');
      expect(response.body, url).toContain('&lt;script&gt;alert(1)&lt;/script&gt;');
    }
    // the JSON twin keeps the names exactly
    const json = (await app.inject({ url: `${sessionHref}.json` })).json();
    expect(json.attributes[0].attribute).toBe(`attr${SCRIPT}`);
    expect(json.attributes[0].rows[0].assessor).toBe(`A${SCRIPT}`);
    // and the not-found page escapes the name it echoes
    const missing = await app.inject({ url: `/panels/${encodeURIComponent(SCRIPT)}` });
    expect(missing.statusCode).toBe(404);
    expect(missing.body).not.toContain('<script');
  });
});

describe('CSV downloads', () => {
  it('neutralises formula-like cells, and the download imports back to the same names', async () => {
    const { app } = await fresh();
    const rows = [
      ['W01', '2026-01-05', '=HYPERLINK("x")', '+P1', 1, '-bitter', 4],
      ['W01', '2026-01-05', '@A2', 'P2', 1, '-bitter', 5],
    ];
    expect((await postCsv(app, 'oat', quotedLongCsv(rows))).statusCode).toBe(200);
    const download = await app.inject({ url: '/panels/oat/sessions/W01.csv' });
    const lines = download.body.trim().split('\r\n').slice(1);
    for (const line of lines) {
      for (const cell of line.split(',')) expect(cell.replace(/^"/, '')).not.toMatch(/^[=+\-@]/);
    }
    expect(download.body).toContain(`"'=HYPERLINK(""x"")"`);
    expect(download.body).toContain("'@A2");
    expect(download.body).toContain("'-bitter");
    // import reads back what export wrote
    expect((await postCsv(app, 'copy', download.body)).statusCode).toBe(200);
    const original = (await app.inject({ url: '/panels/oat/sessions/W01.json' })).json();
    const copy = (await app.inject({ url: '/panels/copy/sessions/W01.json' })).json();
    expect(copy.attributes).toEqual(original.attributes);
    expect(copy.attributes[0].attribute).toBe('-bitter');
  });
});

describe('access token', () => {
  it('refuses to build an app on a non-loopback address without a token', async () => {
    const db = openStore(':memory:');
    await expect(buildApp({ db, config: { host: '0.0.0.0' } })).rejects.toThrow(/access token/);
    await expect(buildApp({ db, config: { host: '0.0.0.0', accessToken: 'short' } })).rejects.toThrow(/16 characters/);
    db.close();
  });

  it('tells loopback from other addresses', () => {
    for (const host of ['127.0.0.1', 'localhost', '::1', '127.0.0.2']) expect(isLoopbackHost(host), host).toBe(true);
    for (const host of ['0.0.0.0', '::', '192.168.1.20', 'lab-pc.local']) expect(isLoopbackHost(host), host).toBe(false);
  });

  it('requires the token for every read and write of panel data off loopback', async () => {
    const { app } = await fresh({ host: '0.0.0.0', accessToken: TOKEN });
    const lan = { host: 'lab-pc:8080' };
    for (const url of ['/api/panels', '/.json', '/panels/oat.json', '/imports.json', '/upload.json']) {
      const response = await app.inject({ url, headers: lan });
      expect(response.statusCode, url).toBe(401);
      expect(response.json()).toMatchObject({ ok: false, code: 'AUTH_REQUIRED' });
      expect(response.headers['www-authenticate']).toContain('Bearer');
    }
    const write = await app.inject({ method: 'POST', url: '/api/panels/oat/imports', headers: { ...lan, 'content-type': 'text/csv' }, payload: 'x' });
    expect(write.statusCode).toBe(401);
    const wrong = await app.inject({ url: '/api/panels', headers: { ...lan, authorization: 'Bearer not-the-token' } });
    expect(wrong.statusCode).toBe(401);
    expect(wrong.json().code).toBe('AUTH_INVALID');
    const right = await app.inject({ url: '/api/panels', headers: { ...lan, authorization: `Bearer ${TOKEN}` } });
    expect(right.statusCode).toBe(200);
    // open without the token: the health check, the sign-in page, the stylesheet
    for (const url of ['/healthz', '/login', '/static/style.css']) {
      expect((await app.inject({ url, headers: lan })).statusCode, url).toBe(200);
    }
  });

  it('sends a browser to sign in, and the sign-in cookie opens the pages', async () => {
    const { app } = await fresh({ host: '0.0.0.0', accessToken: TOKEN });
    const lan = { host: 'lab-pc:8080' };
    const page = await app.inject({ url: '/panels/oat?x=1', headers: lan });
    expect(page.statusCode).toBe(303);
    expect(page.headers.location).toBe('/login?next=%2Fpanels%2Foat%3Fx%3D1');
    const login = await app.inject({ url: '/login?next=/imports', headers: lan });
    expect(login.body).toContain('Access token');
    const { token, cookie } = csrfFrom(login);
    const bad = await app.inject({
      method: 'POST',
      url: '/login',
      headers: { ...lan, cookie },
      payload: { _csrf: token, token: 'wrong', next: '/imports' },
    });
    expect(bad.statusCode).toBe(401);
    const good = await app.inject({
      method: 'POST',
      url: '/login',
      headers: { ...lan, cookie },
      payload: { _csrf: token, token: TOKEN, next: '/imports' },
    });
    expect(good.statusCode).toBe(303);
    expect(good.headers.location).toBe('/imports');
    const session = good.cookies.find((c) => c.name === 'panel_steward_session');
    expect(session?.httpOnly).toBe(true);
    expect(session?.sameSite).toBe('Strict');
    expect(session?.value).not.toContain(TOKEN);
    const imports = await app.inject({ url: '/imports', headers: { ...lan, cookie: `panel_steward_session=${session?.value}` } });
    expect(imports.statusCode).toBe(200);
    // never redirects to another site after sign-in
    const offsite = await app.inject({ method: 'POST', url: '/login', headers: { ...lan, cookie }, payload: { _csrf: token, token: TOKEN, next: '//evil.example/' } });
    expect(offsite.headers.location).toBe('/');
  });
});

describe('request origin', () => {
  it('answers only requests addressed to a loopback name when listening on loopback', async () => {
    const { app } = await fresh();
    const rebound = await app.inject({ url: '/api/panels', headers: { host: 'attacker.example:8080' } });
    expect(rebound.statusCode).toBe(403);
    expect(rebound.json().code).toBe('HOST_NOT_ALLOWED');
    expect((await app.inject({ url: '/api/panels', headers: { host: '127.0.0.1:8080' } })).statusCode).toBe(200);
  });

  it('refuses writes that a browser marks as coming from another site', async () => {
    const { app } = await fresh();
    const crossSite = await app.inject({
      method: 'POST',
      url: '/api/panels/oat/imports',
      headers: { 'content-type': 'text/csv', origin: 'http://evil.example', host: 'localhost:8080' },
      payload: 'x',
    });
    expect(crossSite.statusCode).toBe(403);
    expect(crossSite.json().code).toBe('CROSS_SITE_REQUEST');
    const fetchMeta = await app.inject({
      method: 'POST',
      url: '/api/panels/oat/imports',
      headers: { 'content-type': 'text/csv', 'sec-fetch-site': 'cross-site' },
      payload: 'x',
    });
    expect(fetchMeta.statusCode).toBe(403);
  });
});

describe('error answers', () => {
  it('registers a 4xx or 5xx status and a message for every code', () => {
    for (const [code, entry] of Object.entries(ERROR_REGISTRY)) {
      expect(entry.status, code).toBeGreaterThanOrEqual(400);
      expect(entry.status, code).toBeLessThan(600);
      expect(entry.message, code).toMatch(/\S/);
    }
  });

  it('hides internals of a server failure in HTML and JSON', async () => {
    const local = await makeTestApp();
    local.db.close(); // every query now throws inside better-sqlite3
    for (const url of ['/.json', '/']) {
      const response = await local.app.inject({ url });
      expect(response.statusCode, url).toBe(500);
      expect(response.body).toContain('Something went wrong on the server.');
      expect(response.body).not.toMatch(/database|sqlite|\/work\/|node_modules|at .*\.ts:\d+/i);
    }
    const json = await local.app.inject({ url: '/.json' });
    expect(json.json()).toMatchObject({ ok: false, status: 500, code: 'INTERNAL' });
    await local.app.close();
  });

  it('answers malformed requests with a JSON error list', async () => {
    const { app } = await fresh();
    const badUrl = await app.inject({ url: '/api/panels/%E0%A4%A/imports' });
    expect(badUrl.statusCode).toBeGreaterThanOrEqual(400);
    expect(badUrl.statusCode).toBeLessThan(500);
    const badMultipart = await app.inject({
      method: 'POST',
      url: '/api/panels/oat/imports',
      headers: { 'content-type': 'multipart/form-data; boundary=xyz' },
      payload: '--xyz\r\nContent-Disposition: form-data; name="file"; filename="a.csv"\r\n\r\nsession',
    });
    expect(badMultipart.statusCode).toBeGreaterThanOrEqual(400);
    expect(badMultipart.statusCode).toBeLessThan(500);
    expect(badMultipart.json().ok).toBe(false);
    expect(badMultipart.json().errors.length).toBeGreaterThan(0);
  });
});
