/**
 * Handlebars rendering. Templates live in `templates/` (layouts/, partials/, pages/), are
 * compiled once at start-up, and only ever see the view objects built in `report/` plus a small
 * `chrome` object (navigation, JSON link, CSRF token). Output is escaped: templates use `{{ }}`
 * only (test/architecture.test.ts rejects triple braces). Helpers format; they never decide.
 */
import { formatP, formatPValue } from '../../report/words.js';
import { readdirSync, readFileSync } from 'node:fs';
import { basename, join } from 'node:path';
import Handlebars from 'handlebars';
import { linkMethodsReferences } from '../../report/methods-references.js';

/** A link in the site navigation. Panel-scoped sections appear on pages about one panel. */
export interface NavSection {
  label: string;
  scope: 'global' | 'panel';
  /** Global sections: a path. Panel sections: built from the panel name. */
  href: string | ((panel: string) => string);
  /** Smaller first. */
  order: number;
}

export interface NavLink {
  label: string;
  href: string;
  isCurrent: boolean;
}

/** What the layout needs besides the page's view. */
export interface PageChrome {
  nav: NavLink[];
  panel: string | null;
  panelNav: NavLink[];
  jsonHref: string | null;
  csrfToken: string | null;
  isTokenRequired: boolean;
  version: string;
  /** Seconds until the page reloads itself (a view's refreshSeconds, while a refit runs); null: never. */
  refreshSeconds: number | null;
}

export interface ViewRenderer {
  /** Renders `templates/pages/NAME.hbs` with the view and the chrome; returns HTML. */
  render(page: string, view: object, chrome: PageChrome): string;
  pageNames(): string[];
}

function formatNumber(value: unknown, digits: unknown): string {
  if (typeof value !== 'number' || !Number.isFinite(value)) return '—';
  const nDigits = typeof digits === 'number' ? digits : 2;
  return value.toFixed(nDigits);
}

function registerHelpers(handlebars: typeof Handlebars): void {
  // {{number value 2}}: fixed digits, a dash for null/missing.
  handlebars.registerHelper('number', (value: unknown, digits: unknown) => formatNumber(value, digits));
  // {{percent value}}: "97.5 %", a dash when undefined.
  handlebars.registerHelper('percent', (value: unknown) =>
    typeof value === 'number' && Number.isFinite(value) ? `${value.toFixed(1)} %` : '—',
  );
  handlebars.registerHelper('eq', (a: unknown, b: unknown) => a === b);
  // {{pvalue p}} in a table cell ("0.003", "< 0.001"); {{pformat p}} in a sentence ("p = 0.003"): one format everywhere.
  handlebars.registerHelper('pvalue', (value: unknown) => formatPValue(typeof value === 'number' ? value : null));
  handlebars.registerHelper('pformat', (value: unknown) => formatP(typeof value === 'number' ? value : null));
  // {{plural n "panel" "panels"}}
  handlebars.registerHelper('plural', (n: unknown, one: unknown, many: unknown) => (n === 1 ? one : many));
  // {{methodsLinks text}}: the text escaped, each "§x.y" a link to that section of the methods page.
  handlebars.registerHelper('methodsLinks', (text: unknown) => {
    if (text === null || text === undefined) return '';
    const escape = handlebars.Utils.escapeExpression;
    const html = linkMethodsReferences(String(text))
      .map((part) => (part.href === null ? escape(part.text) : `<a href="${escape(part.href)}">${escape(part.text)}</a>`))
      .join('');
    return new handlebars.SafeString(html);
  });
}

function hbsFiles(folder: string): string[] {
  return readdirSync(folder)
    .filter((name) => name.endsWith('.hbs'))
    .sort();
}

/**
 * Compiles every template in the folder once. Throws at start-up when one does not compile.
 * `strict` (tests) makes a template that reads a field its view lacks throw instead of printing
 * nothing, which is how test/http/template-contract.test.ts checks templates against views.
 */
export function createViewRenderer(templatesDir: string, options: { strict?: boolean } = {}): ViewRenderer {
  const handlebars = Handlebars.create();
  registerHelpers(handlebars);
  handlebars.registerPartial('layout', readFileSync(join(templatesDir, 'layouts', 'main.hbs'), 'utf8'));
  for (const file of hbsFiles(join(templatesDir, 'partials'))) {
    handlebars.registerPartial(basename(file, '.hbs'), readFileSync(join(templatesDir, 'partials', file), 'utf8'));
  }
  const pages = new Map<string, Handlebars.TemplateDelegate>();
  for (const file of hbsFiles(join(templatesDir, 'pages'))) {
    const source = readFileSync(join(templatesDir, 'pages', file), 'utf8');
    const template = handlebars.compile(source, { preventIndent: true, strict: options.strict ?? false });
    if (!options.strict) template({ chrome: {}, title: '', breadcrumbs: [] }); // compile now: a broken template stops the start
    pages.set(basename(file, '.hbs'), template);
  }
  return {
    render(page, view, chrome) {
      const template = pages.get(page);
      if (template === undefined) throw new Error(`no page template named ${page}`);
      return template({ ...view, chrome });
    },
    pageNames: () => [...pages.keys()],
  };
}

/** Builds the navigation links of a page from the registered sections. */
export function buildNav(sections: NavSection[], panel: string | null, currentPath: string): { nav: NavLink[]; panelNav: NavLink[] } {
  const sorted = [...sections].sort((a, b) => a.order - b.order);
  const link = (section: NavSection, href: string): NavLink => ({
    label: section.label,
    href,
    isCurrent: href === currentPath,
  });
  const nav = sorted
    .filter((section) => section.scope === 'global' && typeof section.href === 'string')
    .map((section) => link(section, section.href as string));
  const panelNav =
    panel === null
      ? []
      : sorted
          .filter((section) => section.scope === 'panel' && typeof section.href === 'function')
          .map((section) => link(section, (section.href as (panel: string) => string)(panel)));
  return { nav, panelNav };
}
