/** Service basics: the health check and the one stylesheet. */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { FastifyInstance } from 'fastify';

export async function serviceRoutes(app: FastifyInstance): Promise<void> {
  app.get('/healthz', async () => {
    app.db.prepare('SELECT 1').get(); // the store answers
    return { ok: true, status: 'ok', importsWaiting: app.importQueue.size };
  });

  const stylesheet = readFileSync(join(app.appConfig.templatesDir, 'static', 'style.css'), 'utf8');
  app.get('/static/style.css', async (_request, reply) =>
    reply.type('text/css; charset=utf-8').header('Cache-Control', 'public, max-age=300').send(stylesheet),
  );
}
