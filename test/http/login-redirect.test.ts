/**
 * Open redirect on /login: `next` is followed only as a path of this service. The attack run's
 * payloads (a tab that browsers strip so `/\t/host` becomes `//host`; a zero-width space, LF or
 * CR that made Node refuse the Location header and fastify answer with its own bare 500) plus
 * generated ones: the Location is always a same-origin path, and no answer has fastify's body.
 */
import Fastify from 'fastify';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { toAppError } from '../../server/errors.js';
import { sendError } from '../../server/plugins/pages.js';
import { safeNext } from '../../server/routes/login.js';
import { csrfFrom, freshApps } from './http-helpers.js';

const BASE = 'http://127.0.0.1:8080';

/** The Location resolves to this service and is a path (what a browser would follow). */
function expectSameOriginPath(location: unknown): void {
  expect(typeof location).toBe('string');
  const text = location as string;
  expect(text.startsWith('/')).toBe(true);
  expect(text.startsWith('//')).toBe(false);
  expect(text).not.toMatch(/[\\\u0000-\u0020\u007f-\uffff]/);
  // What a browser does: strip tabs and line breaks, then resolve against the page's address.
  const browserView = text.replace(/[\t\n\r]/g, '');
  expect(new URL(browserView, BASE).origin).toBe(BASE);
}

/** fastify's own error body has statusCode/error/message and no `ok`. */
function expectAppShape(body: string, status: number): void {
  if (status < 400) return;
  expect(body).not.toContain('"statusCode"');
  expect(body).not.toContain('ERR_INVALID_CHAR');
}

const NAMED_PAYLOADS = ['/%09/127.0.0.1:18599/x', '/%E2%80%8B', '/%0a', '/%0d', '//evil', '/%5Cevil', '/\\evil', '/%0a%0dLocation:%20http://evil', '/.//evil', '/%E2%80%AE/evil'];

describe('safeNext', () => {
  it.each([
    ['/imports', '/imports'],
    ['/panels/oat?x=1#top', '/panels/oat?x=1#top'],
    ['/panels/M\u00fcsli', '/panels/M%C3%BCsli'],
    ['/\t/127.0.0.1:18599/x', '/'],
    ['/\u200b', '/'],
    ['/\n', '/'],
    ['/\r', '/'],
    ['//evil', '/'],
    ['/\\evil', '/'],
    ['/.//evil', '/'],
    ['http://evil/', '/'],
    ['javascript:alert(1)', '/'],
    ['', '/'],
    [undefined, '/'],
  ])('%j → %j', (raw, expected) => {
    expect(safeNext(raw)).toBe(expected);
  });
});

describe('GET and POST /login with a hostile next', () => {
  const fresh = freshApps();

  it.each(NAMED_PAYLOADS)('next=%s: 303 to a same-origin path, never a bare 500', async (payload) => {
    const { app } = await fresh();
    const response = await app.inject({ url: `/login?next=${payload}` });
    expect(response.statusCode).toBe(303);
    expectSameOriginPath(response.headers.location);
  });

  it('with a token: the sign-in page keeps only a safe next, and the POST goes there', async () => {
    const { app } = await fresh({ host: '0.0.0.0', accessToken: 'x7Qp-2mZr9vLk4Tn8sWd3JhB' });
    const lan = { host: 'lab-pc:8080' };
    for (const payload of NAMED_PAYLOADS) {
      const page = await app.inject({ url: `/login?next=${payload}`, headers: lan });
      expect(page.statusCode, payload).toBe(200);
      const { token, cookie } = csrfFrom(page);
      const raw = decodeURIComponent(payload);
      const signIn = await app.inject({ method: 'POST', url: '/login', headers: { ...lan, cookie }, payload: { _csrf: token, token: 'x7Qp-2mZr9vLk4Tn8sWd3JhB', next: raw } });
      expect(signIn.statusCode, payload).toBe(303);
      expect(signIn.headers.location, payload).toBe('/');
    }
  });

  it('fast-check: whatever next is, the answer is a redirect to a same-origin path', async () => {
    const { app } = await fresh();
    const pieces = fc.constantFrom('/', '//', '\\', '\t', '\n', '\r', '\u200b', '\u202e', '\ufeff', '\u00a0', ' ', '.', '..', 'evil', ':', '@', '?', '#', '%', '%0a', '%2f', 'x', '\u00e9', 'http:', '127.0.0.1:18599');
    const nextArb = fc.oneof(fc.string({ unit: pieces, maxLength: 8 }).map((s) => `/${s}`), fc.string({ unit: pieces, maxLength: 8 }), fc.string({ maxLength: 20 }));
    await fc.assert(
      fc.asyncProperty(nextArb, async (next) => {
        const response = await app.inject({ url: `/login?next=${encodeURIComponent(next)}` });
        expect(response.statusCode).toBe(303);
        expectSameOriginPath(response.headers.location);
      }),
      { numRuns: 400 },
    );
  });
});

describe('errors raised while sending headers', () => {
  it('are answered in the app error shape, without the header that failed', async () => {
    const app = Fastify();
    app.setErrorHandler((error, request, reply) => sendError(app, request, reply, toAppError(error, { uploadLimitBytes: 1, path: '/x', method: 'GET' })));
    app.get('/api/x', async (_request, reply) => reply.redirect('/\u200b', 303));
    app.get('/api/y', async (_request, reply) => reply.header('x-note', 'a\nb').send({ ok: true }));
    await app.ready();
    for (const url of ['/api/x', '/api/y']) {
      const response = await app.inject({ url });
      expect(response.statusCode, url).toBe(400);
      expect(response.json()).toMatchObject({ ok: false, code: 'BAD_REQUEST' });
      expect(response.headers.location).toBeUndefined();
      expectAppShape(response.body, response.statusCode);
    }
    await app.close();
  });
});
