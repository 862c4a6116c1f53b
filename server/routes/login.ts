/**
 * Sign-in for a service reachable from other computers: the person types the access token once,
 * the browser keeps a cookie derived from it (HttpOnly, SameSite=Strict), and every page works.
 * API clients send `Authorization: Bearer <token>` instead.
 */
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { AppError } from '../errors.js';
import { sendPage } from '../plugins/pages.js';
import { equalSecret, hasValidCredentials, sessionCookieValue, TOKEN_COOKIE } from '../plugins/security.js';

/** Only paths on this service are followed after sign-in (never another site). */
function safeNext(raw: unknown): string {
  const next = typeof raw === 'string' ? raw : '/';
  return next.startsWith('/') && !next.startsWith('//') && !next.startsWith('/\\') && next.length <= 2000 ? next : '/';
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
    if (accessToken === null || hasValidCredentials(request, accessToken)) return reply.redirect(next, 303);
    return loginPage(request, reply, next, null);
  });

  app.post('/login', { preHandler: app.csrfProtection }, async (request, reply) => {
    const body = (request.body ?? {}) as Record<string, unknown>;
    const next = safeNext(body.next);
    const accessToken = app.appConfig.accessToken;
    if (accessToken === null) return reply.redirect(next, 303);
    if (typeof body.token !== 'string' || !equalSecret(body.token.trim(), accessToken)) {
      return loginPage(request, reply, next, { message: new AppError('AUTH_INVALID').message, errors: [] }, 401);
    }
    reply.setCookie(TOKEN_COOKIE, sessionCookieValue(accessToken), { path: '/', httpOnly: true, sameSite: 'strict' });
    return reply.redirect(next, 303);
  });
}
