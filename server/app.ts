/**
 * The web service: `buildApp({ db, config })` wires the store, security, templates and routes
 * into a fastify instance and never listens (tests use `app.inject`; serve-command listens).
 *
 * Route modules are fastify plugins registered below, one line each. A module that adds pages
 * about a panel pushes its navigation entry to `app.navSections` (see server/plugins/views.ts).
 */
import { readFileSync } from 'node:fs';
import { rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Fastify, { type FastifyInstance } from 'fastify';
import type { Database } from 'better-sqlite3';
import { storeHealthOf } from '../store/open-store.js';
import { packageRoot } from '../store/package-root.js';
import { isCorruptionError } from '../store/store-health.js';
import { AppError, toAppError } from './errors.js';
import type { AppConfig } from './plugins/app-context.js';
import type { FitRunner } from './fit-pool.js';
import { ImportQueue } from './plugins/import-queue.js';
import { sendError } from './plugins/pages.js';
import { storeDamagedError } from './store-damage.js';
import { isLoopbackHost, registerSecurity } from './plugins/security.js';
import { registerRefitService } from './plugins/refit-service.js';
import { createUploadDir, removeLeftoverUploadDirsOnce } from './plugins/upload-dir.js';
import { weakTokenReason } from './plugins/token-guard.js';
import { registerUploadCleanup } from './plugins/uploads.js';
import { createViewRenderer, type NavSection } from './plugins/views.js';
import { apiRoutes } from './routes/api.js';
import { importPageRoutes } from './routes/import-pages.js';
import { loginRoutes } from './routes/login.js';
import { methodsPageRoutes } from './routes/methods-page.js';
import { monitorApiRoutes } from './routes/monitor-api.js';
import { monitorFormRoutes } from './routes/monitor-forms.js';
import { monitorRoutes } from './routes/monitor.js';
import { reportPageRoutes } from './routes/report-pages.js';
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
    uploadTmpDir: partial.uploadTmpDir ?? tmpdir(),
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

/** Methods that only read; every other request may write and is refused on a damaged store. */
const READING_METHODS = new Set(['GET', 'HEAD', 'OPTIONS']);
/** Writes that do not touch the store. */
const STORE_FREE_WRITES = new Set(['/login', '/logout']);

/**
 * `runner`: the fit runner of the background refits (default: a worker-thread pool); tests may
 * pass an in-thread one.
 */
export async function buildApp(options: { db: Database; config?: Partial<AppConfig>; runner?: FitRunner }): Promise<FastifyInstance> {
  const config = resolveAppConfig(options.config);
  if (!isLoopbackHost(config.host) && config.accessToken === null) {
    throw new Error(`Listening on ${config.host} (reachable from other computers) needs an access token of at least 16 characters.`);
  }
  const weakToken = config.accessToken === null ? null : weakTokenReason(config.accessToken);
  if (weakToken !== null) throw new Error(weakToken);

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
  app.decorate('storeHealth', storeHealthOf(options.db));
  const removedLeftovers = await removeLeftoverUploadDirsOnce(config.uploadTmpDir);
  if (removedLeftovers.length > 0) app.log.info({ removed: removedLeftovers }, 'removed upload folders left by earlier starts');
  app.decorate('uploadDir', await createUploadDir(config.uploadTmpDir));
  app.addHook('onClose', async () => {
    await rm(app.uploadDir, { recursive: true, force: true });
  });

  app.setErrorHandler((error, request, reply) => {
    if (isCorruptionError(error)) {
      // Damage found while serving: from now on the store is read-only and every page says why.
      if (app.storeHealth.ok) {
        app.storeHealth = { ok: false, path: app.storeHealth.path, problems: [error instanceof Error ? error.message : String(error)] };
        try {
          app.db.pragma('query_only = ON');
        } catch {
          // the refusal hook below still stops every write request
        }
      }
      request.log.error({ err: error }, 'the store is damaged');
      return sendError(app, request, reply, storeDamagedError(app.storeHealth));
    }
    const appError = toAppError(error, {
      uploadLimitBytes: config.uploadLimitBytes,
      path: request.url.split('?')[0].slice(0, 200),
      method: request.method,
      bodyLimitBytes: request.routeOptions.bodyLimit,
      storePath: options.db.name,
      uploadDir: app.uploadDir,
    });
    if (appError.status >= 500) request.log.error({ err: error }, 'request failed');
    else request.log.info({ code: appError.code, status: appError.status }, appError.message);
    return sendError(app, request, reply, appError);
  });
  app.setNotFoundHandler((request, reply) =>
    sendError(app, request, reply, new AppError('NOT_FOUND', { path: request.url.split('?')[0].slice(0, 200) })),
  );

  registerUploadCleanup(app);
  await registerSecurity(app);
  // After the security hooks (a request without its token still gets 401 first); before the
  // body is read, so an upload to a damaged store is refused without being stored anywhere.
  app.addHook('onRequest', async (request) => {
    if (app.storeHealth.ok || READING_METHODS.has(request.method)) return;
    if (STORE_FREE_WRITES.has(request.url.split('?')[0])) return;
    throw storeDamagedError(app.storeHealth);
  });

  // Shutdown: refuse new imports first, then wait for the one in progress before the store closes.
  app.addHook('preClose', async () => {
    await app.importQueue.close();
  });

  // Background refits (app.refitService, app.historyMemo): before the routes that queue them.
  registerRefitService(app, { runner: options.runner });

  // ---- route modules (one line each) ----
  await app.register(serviceRoutes);
  await app.register(loginRoutes);
  await app.register(panelPageRoutes);
  await app.register(importPageRoutes);
  await app.register(uploadPageRoutes);
  await app.register(apiRoutes);
  await app.register(quarantineRoutes);
  await app.register(monitorRoutes);
  await app.register(monitorFormRoutes);
  await app.register(monitorApiRoutes);
  await app.register(methodsPageRoutes);
  await app.register(reportPageRoutes);
  await app.register(reviewRoutes);
  // ---- end of route modules ----

  await app.ready();
  return app;
}
