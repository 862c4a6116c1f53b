/** Service basics: the health check and the stylesheets (site-wide, and the reports' own). */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { FastifyInstance } from 'fastify';
import { storeDamagedError } from '../store-damage.js';

export async function serviceRoutes(app: FastifyInstance): Promise<void> {
  app.get('/healthz', async (_request, reply) => {
    // Non-200 with the reason when the store opened damaged (or a request met a damaged page);
    // JSON whatever the client accepts, as monitoring tools read it.
    if (!app.storeHealth.ok) {
      const error = storeDamagedError(app.storeHealth);
      return reply.code(error.status).type('application/json; charset=utf-8').send(error.toBody());
    }
    app.db.prepare('SELECT 1').get(); // the store answers
    return { ok: true, status: 'ok', importsWaiting: app.importQueue.size };
  });

  // Browsers ask for it on every site; an empty answer keeps 404s out of the log.
  app.get('/favicon.ico', async (_request, reply) => reply.code(204).header('Cache-Control', 'public, max-age=86400').send());

  const stylesheet = readFileSync(join(app.appConfig.templatesDir, 'static', 'style.css'), 'utf8');
  app.get('/static/style.css', async (_request, reply) =>
    reply.type('text/css; charset=utf-8').header('Cache-Control', 'public, max-age=300').send(stylesheet),
  );
  const reportStylesheet = readFileSync(join(app.appConfig.templatesDir, 'static', 'report.css'), 'utf8');
  app.get('/static/report.css', async (_request, reply) =>
    reply.type('text/css; charset=utf-8').header('Cache-Control', 'public, max-age=300').send(reportStylesheet),
  );
}
