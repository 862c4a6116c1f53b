/**
 * The methods document (docs/methods.md) as a page at /methods, with its JSON twin. Pages and
 * threshold descriptions link their "§x.y" references to its sections. Read once at start-up:
 * the document changes only with a new version of the service.
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import type { FastifyInstance } from 'fastify';
import { METHODS_PATH } from '../../report/methods-references.js';
import { buildMethodsView } from '../../report/methods-view.js';
import { packageRoot } from '../../store/package-root.js';
import { registerPage } from '../plugins/pages.js';

export async function methodsPageRoutes(app: FastifyInstance): Promise<void> {
  const view = buildMethodsView(readFileSync(join(packageRoot(), 'docs', 'methods.md'), 'utf8'));
  app.navSections.push({ label: 'Methods', scope: 'global', href: METHODS_PATH, order: 80 });
  registerPage(app, { url: METHODS_PATH, template: 'methods', build: () => view });
}
