/**
 * The web service: `buildApp({ db, config })` wires the store, security, templates and routes
 * into a fastify instance and never listens (tests use `app.inject`; serve-command listens).
 *
 * Route modules are fastify plugins registered below, one line each. A module that adds pages
 * about a panel pushes its navigation entry to `app.navSections` (see server/plugins/views.ts).
 */
import { readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Fastify, { type FastifyInstance } from 'fastify';
import type { Database } from 'better-sqlite3';
import { packageRoot } from '../store/package-root.js';
import { AppError, toAppError } from './errors.js';
import type { AppConfig } from './plugins/app-context.js';
import { ImportQueue } from './plugins/import-queue.js';
import { sendError } from './plugins/pages.js';
import { isLoopbackHost, registerSecurity } from './plugins/security.js';
import { registerUploadCleanup } from './plugins/uploads.js';
import { createViewRenderer, type NavSection } from './plugins/views.js';
import { apiRoutes } from './routes/api.js';
import { importPageRoutes } from './routes/import-pages.js';
import { loginRoutes } from './routes/login.js';
import { monitorRoutes } from './routes/monitor.js';
import { reviewRoutes } from './routes/review.js';
import { panelPageRoutes } from './routes/panel-pages.js';
import { quarantineRoutes } from './routes/quarantine.js';
import { serviceRoutes } from './routes/service.js';
import { uploadPageRoutes } from './routes/upload-page.js';

export type { AppConfig } from './plugins/app-context.js';

/** 50 MB: a year of a large panel in long form is about 10 MB. */
export const DEFAULT_UPLOAD_LIMIT_BYTES = 50 * 1024 * 1024;

function packageVersion(root: string): string {
  try {
    return (JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')) as { version?: string }).version ?? '';
  } catch {
    return '';
  }
}

/** The configuration with every field filled in. */
export function resolveAppConfig(partial: Partial<AppConfig> = {}): AppConfig {
  const root = packageRoot();
  return {
    host: partial.host ?? '127.0.0.1',
    accessToken: partial.accessToken ?? null,
    uploadLimitBytes: partial.uploadLimitBytes ?? DEFAULT_UPLOAD_LIMIT_BYTES,
    uploadTmpDir: partial.uploadTmpDir ?? join(tmpdir(), 'panel-steward-uploads'),
    templatesDir: partial.templatesDir ?? join(root, 'templates'),
    version: partial.version ?? packageVersion(root),
    logger: partial.logger ?? false,
  };
}

/** The sections every page's navigation starts with. */
export function defaultNavSections(): NavSection[] {
  return [
    { label: 'Panels', scope: 'global', href: '/', order: 10 },
    { label: 'Imports', scope: 'global', href: '/imports', order: 20 },
    { label: 'Upload', scope: 'global', href: '/upload', order: 30 },
    { label: 'Sessions', scope: 'panel', href: (panel) => `/panels/${encodeURIComponent(panel)}`, order: 10 },
    { label: 'Imports', scope: 'panel', href: (panel) => `/imports?panel=${encodeURIComponent(panel)}`, order: 90 },
  ];
}

export async function buildApp(options: { db: Database; config?: Partial<AppConfig> }): Promise<FastifyInstance> {
  const config = resolveAppConfig(options.config);
  if (!isLoopbackHost(config.host) && (config.accessToken === null || config.accessToken.length < 16)) {
    throw new Error(`Listening on ${config.host} (reachable from other computers) needs an access token of at least 16 characters.`);
  }

  const app: FastifyInstance = Fastify({
    logger: config.logger,
    // Requests the router cannot even read (a path like /%zz) get the same error shape as all others.
    frameworkErrors: (_error, request, reply) =>
      sendError(app, request, reply, new AppError('BAD_REQUEST', { detail: 'the address has invalid percent-encoding.' })),
    // Panel and session names can be long; the default of 100 characters would turn them into 404s.
    routerOptions: { maxParamLength: 1000 },
    // JSON and form bodies only; uploads stream to disk with their own limit.
    bodyLimit: 1024 * 1024,
    // The service runs behind nobody: the remote address is the client.
    trustProxy: false,
  });

  app.decorate('db', options.db);
  app.decorate('appConfig', config);
  app.decorate('views', createViewRenderer(config.templatesDir));
  app.decorate('navSections', defaultNavSections());
  app.decorate('importQueue', new ImportQueue());

  app.setErrorHandler((error, request, reply) => {
    const appError = toAppError(error, { uploadLimitBytes: config.uploadLimitBytes, path: request.url.split('?')[0].slice(0, 200), method: request.method });
    if (appError.status >= 500) request.log.error({ err: error }, 'request failed');
    else request.log.info({ code: appError.code, status: appError.status }, appError.message);
    return sendError(app, request, reply, appError);
  });
  app.setNotFoundHandler((request, reply) =>
    sendError(app, request, reply, new AppError('NOT_FOUND', { path: request.url.split('?')[0].slice(0, 200) })),
  );

  registerUploadCleanup(app);
  await registerSecurity(app);

  // Shutdown: refuse new imports first, then wait for the one in progress before the store closes.
  app.addHook('preClose', async () => {
    await app.importQueue.close();
  });

  // ---- route modules (one line each) ----
  await app.register(serviceRoutes);
  await app.register(loginRoutes);
  await app.register(panelPageRoutes);
  await app.register(importPageRoutes);
  await app.register(uploadPageRoutes);
  await app.register(apiRoutes);
  await app.register(quarantineRoutes);
  await app.register(monitorRoutes);
  await app.register(reviewRoutes);
  // ---- end of route modules ----

  await app.ready();
  return app;
}
