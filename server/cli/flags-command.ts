/**
 * `panel-steward flags --panel NAME [--db PATH] [--since SESSION] --format json`: the panel's
 * current flags. When the stored flags are older than the data (an import since the last refit),
 * what changed is refitted first, with a note on stderr, so the answer always matches the data.
 */
import type { Command } from 'commander';
import type { FlagCase } from '../../domain/flags.js';
import { kindLabel, plural } from '../../report/words.js';
import { findPanel, listSessionVersions } from '../../store/fits-sessions.js';
import { listCurrentFlagObjects, loadFlagBuild } from '../../store/monitor-flags.js';
import { panelDataSignature } from '../../store/data-signature.js';
import { CliError, stderrFitLogger } from './cli-error.js';
import { COMMAND_SUMMARIES } from './command-summaries.js';
import { openStoreForCli } from './open-store-for-cli.js';

/**
 * The cases for people: open ones first (act, then watch), one line each with the plain label, who
 * and what, the session that raised it and the sentence; dismissed and closed cases only counted.
 */
export function formatFlagsText(flags: FlagCase[]): string {
  const open = flags.filter((f) => f.status === 'open');
  const lines: string[] = [];
  for (const severity of ['act', 'watch'] as const) {
    const group = open.filter((f) => f.severity === severity);
    if (group.length === 0) continue;
    lines.push(severity === 'act' ? `To act on (${plural(group.length, 'case')}):` : `To watch (${plural(group.length, 'case')}):`);
    for (const f of group) {
      const where = [f.assessor, f.attribute, f.product].filter((x) => x !== null).join(' / ') || 'panel';
      lines.push(`  #${f.id} ${kindLabel(f.kind)} (${f.kind}), ${where}, since ${f.detectedSession}: ${f.message}`);
    }
  }
  const dismissed = flags.filter((f) => f.status === 'dismissed').length;
  const closed = flags.filter((f) => f.status === 'closed').length;
  if (open.length === 0) lines.push('No open cases.');
  lines.push(`${plural(open.length, 'open case')}; ${plural(dismissed, 'dismissed case')} and ${plural(closed, 'closed case')} not listed (see --format json).`);
  lines.push('Flags are evidence for review, not verdicts about people; no flag is not proof of good performance.');
  return `${lines.join('\n')}\n`;
}

export function registerFlagsCommand(program: Command): void {
  program
    .command('flags')
    .description(COMMAND_SUMMARIES.flags.description)
    .requiredOption('--panel <name>', 'panel name')
    .option('--db <path>', 'store file (default: PANEL_STEWARD_DB or data/panel-steward.db)')
    .option('--since <session>', 'only cases detected, or whose status changed, at or after this session')
    .option('--format <format>', 'json or text', 'text')
    .action(async (options: { panel: string; db?: string; since?: string; format: string }) => {
      if (options.format !== 'json' && options.format !== 'text') {
        throw new CliError(`panel-steward flags: --format must be json or text, not "${options.format}".`, 2);
      }
      const db = openStoreForCli(options.db);
      try {
        const panel = findPanel(db, options.panel);
        if (!panel) throw new CliError(`panel-steward flags: No panel named "${options.panel}" in this store.`, 2);
        const signature = panelDataSignature(listSessionVersions(db, panel.id));
        if (loadFlagBuild(db, panel.id)?.dataSignature !== signature) {
          process.stderr.write('Flags are older than the data: recomputing what changed first.\n');
          // Loaded only here: the refit and its worker pool cost most of the start-up otherwise.
          const [{ createFitPool }, { refitPanel }] = await Promise.all([import('../fit-pool.js'), import('../refit.js')]);
          const runner = createFitPool();
          try {
            await refitPanel(db, options.panel, { runner, logger: stderrFitLogger, flagsOnCallingThread: true });
          } finally {
            await runner.close();
          }
        }
        let flags: FlagCase[];
        try {
          flags = listCurrentFlagObjects(db, options.panel, options.since) ?? [];
        } catch (error) {
          if (error instanceof RangeError) throw new CliError(`panel-steward flags: ${error.message}`, 2);
          throw error;
        }
        process.stdout.write(options.format === 'json' ? `${JSON.stringify(flags, null, 2)}\n` : formatFlagsText(flags));
      } finally {
        db.close();
      }
    });
}
