/**
 * `panel-steward report --panel NAME [--db PATH] (--session S | --from S --to S) --out FILE.html`
 *
 * Writes the session report or the range report as one self-contained HTML file to e-mail: the
 * same view and templates as the pages, with the stylesheets inlined, no links to the service
 * and nothing loaded from elsewhere. Reads stored results only (run `refit` first for current ones).
 */
import { readFileSync, renameSync, writeFileSync } from 'node:fs';
import { basename, join } from 'node:path';
import type { Command } from 'commander';
import { COMMAND_SUMMARIES } from './command-summaries.js';
import { openStore } from '../../store/open-store.js';
import { packageRoot } from '../../store/package-root.js';
import { AppError } from '../errors.js';
import { createViewRenderer, type PageChrome } from '../plugins/views.js';
import { rangeReport, sessionReport } from '../reports/report-data.js';
import { CliError, resolveDbPath } from './cli-error.js';

export interface ReportCommandOptions {
  panel: string;
  db?: string;
  session?: string;
  from?: string;
  to?: string;
  out: string;
}

/** Replaces each stylesheet link by the stylesheet itself, so the file needs nothing else. */
export function inlineStylesheets(html: string, templatesDir: string): string {
  return html.replace(/<link rel="stylesheet" href="\/static\/([a-z-]+\.css)">/g, (_match, file: string) => {
    const css = readFileSync(join(templatesDir, 'static', file), 'utf8');
    // "</style" cannot occur in our stylesheets; guard anyway so the element cannot be closed early.
    return `<style>\n${css.replace(/<\/style/gi, '<\\/style')}\n</style>`;
  });
}

/** Renders the report HTML (self-contained). Throws CliError with a plain message on bad input. */
export function renderReportFile(options: Omit<ReportCommandOptions, 'out'>, generatedAt = new Date()): string {
  const hasSession = options.session !== undefined;
  const hasRange = options.from !== undefined || options.to !== undefined;
  if (hasSession === hasRange) throw new CliError('panel-steward report: give either --session S or both --from S and --to S.', 2);
  if (hasRange && (options.from === undefined || options.to === undefined)) throw new CliError('panel-steward report: --from and --to go together.', 2);
  const db = openStore(resolveDbPath(options.db));
  try {
    const templatesDir = join(packageRoot(), 'templates');
    const renderer = createViewRenderer(templatesDir);
    const reportOptions = { generatedAt, isStandaloneFile: true };
    let view: object;
    let page: string;
    try {
      if (hasSession) {
        view = sessionReport(db, options.panel, options.session!, reportOptions);
        page = 'report-session';
      } else {
        view = rangeReport(db, options.panel, options.from!, options.to!, reportOptions);
        page = 'report-range';
      }
    } catch (error) {
      if (error instanceof AppError) throw new CliError(`panel-steward report: ${error.message}`, 2);
      throw error;
    }
    const chrome: PageChrome = { nav: [], panel: null, panelNav: [], jsonHref: null, csrfToken: null, isTokenRequired: false, version: '', refreshSeconds: null };
    return inlineStylesheets(renderer.render(page, view, chrome), templatesDir);
  } finally {
    db.close();
  }
}

export function registerReportCommand(program: Command): void {
  program
    .command('report')
    .description(COMMAND_SUMMARIES.report.description)
    .requiredOption('--panel <name>', 'panel name')
    .option('--db <path>', 'store file (default: PANEL_STEWARD_DB or data/panel-steward.db)')
    .option('--session <session>', 'one session')
    .option('--from <session>', 'first session of a range')
    .option('--to <session>', 'last session of a range')
    .requiredOption('--out <file>', 'HTML file to write')
    .action((options: ReportCommandOptions) => {
      const html = renderReportFile(options);
      // Written beside the target, then renamed: never a half-written report.
      const temporary = `${options.out}.${process.pid}.tmp`;
      writeFileSync(temporary, html, 'utf8');
      renameSync(temporary, options.out);
      process.stderr.write(`Wrote ${basename(options.out)} (${Math.round(html.length / 1024)} kB).\n`);
    });
}
