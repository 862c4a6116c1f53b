/**
 * Sign-in for a service reachable from other computers: the person types the access token once,
 * the browser keeps a cookie derived from it (HttpOnly, SameSite=Strict), and every page works.
 * API clients send `Authorization: Bearer <token>` instead.
 */
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { AppError } from '../errors.js';
import { sendPage } from '../plugins/pages.js';
import { checkPresentedCredentials, equalSecret, refuseWhileBraked, SESSION_MAX_AGE_SECONDS, sessionCookieValue, TOKEN_COOKIE } from '../plugins/security.js';

/** A fixed base: `next` is resolved against it, so only its own origin counts as "this service". */
const NEXT_BASE = new URL('http://panel-steward.invalid/');
const MAX_NEXT_CHARS = 2000;
/**
 * Characters a browser may strip or treat specially in a URL (so that `/\t/host` becomes `//host`)
 * or that cannot go into a Location header: controls, every kind of white space, and invisible
 * format characters (zero-width spaces and joiners, bidi controls, the byte-order mark).
 */
const UNSAFE_IN_NEXT = /[\p{Cc}\p{Cf}\p{Z}\p{White_Space}\p{Default_Ignorable_Code_Point}\p{Cs}\p{Co}\p{Cn}]/u;

/**
 * Where to go after sign-in: only a path of this service. Anything else (another origin, a
 * protocol-relative `//host`, a backslash, a control or invisible character, an address that
 * does not parse) goes to `/`. The answer is the parsed path, so it is plain ASCII.
 */
export function safeNext(raw: unknown): string {
  if (typeof raw !== 'string' || raw.length === 0 || raw.length > MAX_NEXT_CHARS) return '/';
  if (raw[0] !== '/' || raw[1] === '/' || raw.includes('\\') || UNSAFE_IN_NEXT.test(raw)) return '/';
  let url: URL;
  try {
    url = new URL(raw, NEXT_BASE);
  } catch {
    return '/';
  }
  if (url.origin !== NEXT_BASE.origin) return '/';
  const path = `${url.pathname}${url.search}${url.hash}`;
  // Dot segments can collapse into a leading "//" ("/.//host"): still another origin to a browser.
  if (!path.startsWith('/') || path.startsWith('//') || path.includes('\\') || path.length > MAX_NEXT_CHARS) return '/';
  return path;
}

export async function loginRoutes(app: FastifyInstance): Promise<void> {
  const loginPage = (request: FastifyRequest, reply: FastifyReply, next: string, failure: { message: string; errors: [] } | null, status = 200) =>
    sendPage(app, request, reply, {
      template: 'login',
      view: { title: 'Sign in', breadcrumbs: [], next, failure },
      jsonHref: null,
      withCsrf: true,
      status,
    });

  app.get('/login', async (request, reply) => {
    const next = safeNext((request.query as Record<string, unknown>).next);
    const accessToken = app.appConfig.accessToken;
    if (accessToken === null) return reply.redirect(next, 303);
    let presented: 'none' | 'valid' | 'wrong';
    try {
      presented = checkPresentedCredentials(app.failedAttempts, request, reply, accessToken);
    } catch (error) {
      if (!(error instanceof AppError)) throw error;
      return loginPage(request, reply, next, { message: error.message, errors: [] }, error.status);
    }
    if (presented === 'valid') return reply.redirect(next, 303);
    return loginPage(request, reply, next, null);
  });

  app.post('/login', { preHandler: app.csrfProtection }, async (request, reply) => {
    const body = (request.body ?? {}) as Record<string, unknown>;
    const next = safeNext(body.next);
    const accessToken = app.appConfig.accessToken;
    if (accessToken === null) return reply.redirect(next, 303);
    try {
      refuseWhileBraked(app.failedAttempts, request, reply);
    } catch (error) {
      if (!(error instanceof AppError)) throw error;
      return loginPage(request, reply, next, { message: error.message, errors: [] }, error.status);
    }
    if (typeof body.token !== 'string' || !equalSecret(body.token.trim(), accessToken)) {
      app.failedAttempts.failed(request.ip);
      return loginPage(request, reply, next, { message: new AppError('AUTH_INVALID').message, errors: [] }, 401);
    }
    app.failedAttempts.succeeded(request.ip);
    // Expires after a working day in the browser, and the service refuses it after that too.
    reply.setCookie(TOKEN_COOKIE, sessionCookieValue(accessToken), { path: '/', httpOnly: true, sameSite: 'strict', maxAge: SESSION_MAX_AGE_SECONDS });
    return reply.redirect(next, 303);
  });
}
