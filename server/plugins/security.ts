/**
 * Security wiring on the root instance:
 * - security headers (@fastify/helmet) with a strict content security policy: no scripts at all,
 *   styles and images from this service only, forms post only to this service;
 * - cookies (@fastify/cookie) and CSRF tokens for forms (@fastify/csrf-protection);
 * - on a loopback address, requests must be addressed to a loopback host name (a web page on
 *   another site cannot reach the store through DNS rebinding);
 * - requests that change data are refused when the browser says they come from another site;
 * - with an access token (required off loopback), every request for panel data needs it, as
 *   `Authorization: Bearer <token>` or the cookie set by the sign-in page (which expires); wrong
 *   tokens are braked per client address (server/plugins/token-guard.ts).
 */
import { createHash, timingSafeEqual } from 'node:crypto';
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import fastifyCookie from '@fastify/cookie';
import fastifyCsrf from '@fastify/csrf-protection';
import fastifyFormbody from '@fastify/formbody';
import fastifyHelmet from '@fastify/helmet';
import { AppError } from '../errors.js';
import { FailedAttemptBrake, isValidSessionCookie } from './token-guard.js';

export { sessionCookieValue, SESSION_MAX_AGE_SECONDS } from './token-guard.js';

export const TOKEN_COOKIE = 'panel_steward_session';

/** Paths reachable without the access token: health check, sign-in page, stylesheet, icon. */
const OPEN_PATHS = new Set(['/healthz', '/login', '/static/style.css', '/favicon.ico']);

const LOOPBACK_NAMES = new Set(['localhost', '127.0.0.1', '::1', '[::1]']);

/** True for addresses only this computer can reach. 0.0.0.0 and :: mean "every interface". */
export function isLoopbackHost(host: string): boolean {
  const bare = host.trim().toLowerCase();
  return LOOPBACK_NAMES.has(bare) || /^127(\.\d{1,3}){3}$/.test(bare) || bare === '::ffff:127.0.0.1';
}

/** The host name of a Host header, without the port. */
function hostName(hostHeader: string): string {
  if (hostHeader.startsWith('[')) return hostHeader.slice(0, hostHeader.indexOf(']') + 1);
  const colon = hostHeader.lastIndexOf(':');
  return colon === -1 ? hostHeader : hostHeader.slice(0, colon);
}

function digest(text: string): Buffer {
  return createHash('sha256').update(text, 'utf8').digest();
}

/** Constant-time comparison (of digests, so lengths need not match). */
export function equalSecret(given: string, expected: string): boolean {
  return timingSafeEqual(digest(given), digest(expected));
}

function bearerToken(request: FastifyRequest): string | null {
  const header = request.headers.authorization;
  if (typeof header !== 'string') return null;
  const match = /^Bearer\s+(\S+)\s*$/i.exec(header);
  return match ? match[1] : null;
}

export function hasValidCredentials(request: FastifyRequest, accessToken: string): boolean {
  const bearer = bearerToken(request);
  if (bearer !== null && equalSecret(bearer, accessToken)) return true;
  const cookie = request.cookies?.[TOKEN_COOKIE];
  return typeof cookie === 'string' && isValidSessionCookie(cookie, accessToken);
}

/** Requests answered in JSON: the API, JSON twins and downloads, or clients asking for JSON. */
export function wantsJson(request: FastifyRequest): boolean {
  const path = request.url.split('?')[0];
  if (path.startsWith('/api/') || path === '/api' || path.endsWith('.json') || path.endsWith('.csv')) return true;
  const accept = request.headers.accept ?? '';
  return accept.includes('application/json') && !accept.includes('text/html');
}

const UNSAFE_METHODS = new Set(['POST', 'PUT', 'PATCH', 'DELETE']);

function isCrossSite(request: FastifyRequest): boolean {
  const fetchSite = request.headers['sec-fetch-site'];
  if (fetchSite === 'cross-site' || fetchSite === 'same-site') return true;
  const origin = request.headers.origin;
  if (origin === undefined) return false; // command-line clients send no Origin
  try {
    return new URL(origin).host !== request.headers.host;
  } catch {
    return true; // "null" or garbage: a sandboxed or opaque origin
  }
}

export async function registerSecurity(app: FastifyInstance): Promise<void> {
  const config = app.appConfig;
  await app.register(fastifyHelmet, {
    contentSecurityPolicy: {
      useDefaults: false,
      directives: {
        defaultSrc: ["'self'"],
        scriptSrc: ["'none'"],
        styleSrc: ["'self'"],
        imgSrc: ["'self'", 'data:'],
        fontSrc: ["'self'"],
        connectSrc: ["'self'"],
        objectSrc: ["'none'"],
        baseUri: ["'none'"],
        formAction: ["'self'"],
        frameAncestors: ["'none'"],
      },
    },
    // Plain HTTP on a lab computer: an HSTS header would lock browsers out of http://host.
    strictTransportSecurity: false,
    referrerPolicy: { policy: 'same-origin' },
  });
  await app.register(fastifyCookie);
  await app.register(fastifyCsrf, {
    cookieOpts: { path: '/', sameSite: 'strict', httpOnly: true },
    // Forms send the token as the hidden field `_csrf`; the upload form's fields are read from
    // the multipart stream before the check (server/plugins/uploads.ts puts them in body.fields).
    getToken: (request: FastifyRequest) => {
      const body = request.body as { _csrf?: unknown; fields?: Record<string, unknown> } | undefined;
      const fromBody = body?._csrf ?? body?.fields?._csrf;
      if (typeof fromBody === 'string') return fromBody;
      const header = request.headers['x-csrf-token'];
      return typeof header === 'string' ? header : '';
    },
  });
  await app.register(fastifyFormbody, { bodyLimit: 64 * 1024 });

  const isLoopback = isLoopbackHost(config.host);
  const accessToken = config.accessToken;
  const brake = new FailedAttemptBrake();
  app.decorate('failedAttempts', brake);

  app.addHook('onRequest', async (request: FastifyRequest, reply: FastifyReply) => {
    const path = request.url.split('?')[0];
    if (isLoopback && !isLoopbackHost(hostName(request.headers.host ?? ''))) throw new AppError('HOST_NOT_ALLOWED');
    if (UNSAFE_METHODS.has(request.method) && isCrossSite(request)) throw new AppError('CROSS_SITE_REQUEST');
    if (accessToken === null || OPEN_PATHS.has(path)) return;
    const presented = checkPresentedCredentials(brake, request, reply, accessToken);
    if (presented === 'valid') return;
    if (bearerToken(request) !== null) throw new AppError('AUTH_INVALID');
    if (!wantsJson(request) && request.method === 'GET') {
      return reply.redirect(`/login?next=${encodeURIComponent(request.url)}`, 303);
    }
    reply.header('WWW-Authenticate', 'Bearer realm="panel-steward"');
    throw new AppError('AUTH_REQUIRED');
  });
}

/** While a client must wait after wrong tokens, its requests with a token are not even checked: 429. */
export function refuseWhileBraked(brake: FailedAttemptBrake, request: FastifyRequest, reply: FastifyReply): void {
  const seconds = brake.retryAfterSeconds(request.ip);
  if (seconds === 0) return;
  reply.header('Retry-After', String(seconds));
  throw new AppError('TOO_MANY_ATTEMPTS', { seconds });
}

/**
 * Checks the token or sign-in cookie a request carries: 'none' when it carries neither. A wrong
 * one counts against the client; while the client must wait, nothing is checked (429). A cookie
 * can be a guess too (it is derived from the token), so it counts as well, and a wrong or
 * outdated one is dropped so that a browser sends it once, not with every request.
 */
export function checkPresentedCredentials(brake: FailedAttemptBrake, request: FastifyRequest, reply: FastifyReply, accessToken: string): 'none' | 'valid' | 'wrong' {
  const cookie = request.cookies?.[TOKEN_COOKIE];
  if (bearerToken(request) === null && typeof cookie !== 'string') return 'none';
  refuseWhileBraked(brake, request, reply);
  if (hasValidCredentials(request, accessToken)) {
    brake.succeeded(request.ip);
    return 'valid';
  }
  brake.failed(request.ip);
  if (typeof cookie === 'string') reply.clearCookie(TOKEN_COOKIE, { path: '/' });
  return 'wrong';
}
