/** `panel-steward refit --panel NAME [--db PATH]`: recompute a panel's fits, period fits and flags. */
import type { Command } from 'commander';
import { SingleBar, Presets } from 'cli-progress';
import { createFitPool } from '../fit-pool.js';
import { PanelNotFoundError, refitPanel, type RefitProgress, type RefitSummary } from '../refit.js';
import { CliError, stderrFitLogger } from './cli-error.js';
import { COMMAND_SUMMARIES } from './command-summaries.js';
import { openStoreForCli } from './open-store-for-cli.js';

const PHASE_NAMES: Record<RefitProgress['phase'], string> = {
  sessions: 'session fits',
  periods: 'period fits',
  flags: 'flags',
};

/** A progress bar on a terminal; on a pipe or file, one plain line per phase and every 10 %. */
export function makeProgressReporter(stream: NodeJS.WriteStream = process.stdout): { update(p: RefitProgress): void; stop(): void } {
  if (stream.isTTY) {
    let bar: SingleBar | null = null;
    let phase: string | null = null;
    return {
      update(p) {
        if (p.phase !== phase) {
          bar?.stop();
          phase = p.phase;
          bar = new SingleBar({ stream, format: `${PHASE_NAMES[p.phase].padEnd(13)} [{bar}] {value}/{total} {label}`, hideCursor: true }, Presets.shades_classic);
          bar.start(p.total, 0, { label: '' });
        }
        bar!.setTotal(p.total);
        bar!.update(p.done, { label: p.label });
      },
      stop() {
        bar?.stop();
      },
    };
  }
  let lastTenth = -1;
  let phase: string | null = null;
  return {
    update(p) {
      if (p.phase !== phase) {
        phase = p.phase;
        lastTenth = -1;
      }
      const tenth = Math.floor((10 * p.done) / Math.max(1, p.total));
      if (tenth !== lastTenth) {
        lastTenth = tenth;
        stream.write(`${PHASE_NAMES[p.phase]}: ${p.done}/${p.total}\n`);
      }
    },
    stop() {},
  };
}

export function describeRefit(summary: RefitSummary): string {
  return (
    `Panel "${summary.panel}": ${summary.sessionsRefitted.length} sessions and ${summary.periodFitsRefitted} period fits ` +
    `recomputed, ${summary.nFlags} flags, in ${(summary.durationMs / 1000).toFixed(1)} s.`
  );
}

export function registerRefitCommand(program: Command): void {
  program
    .command('refit')
    .description(COMMAND_SUMMARIES.refit.description)
    .requiredOption('--panel <name>', 'panel name')
    .option('--db <path>', 'store file (default: PANEL_STEWARD_DB or data/panel-steward.db)')
    .option('--changed-only', 'recompute only what changed since the last refit')
    .option('--threads <n>', 'worker threads (default: number of cores)', (v) => Number.parseInt(v, 10))
    .action(async (options: { panel: string; db?: string; changedOnly?: boolean; threads?: number }) => {
      const db = openStoreForCli(options.db);
      const runner = createFitPool({ threads: options.threads });
      const progress = makeProgressReporter();
      try {
        const summary = await refitPanel(db, options.panel, {
          runner,
          scope: options.changedOnly ? 'stale' : 'all',
          onProgress: (p) => progress.update(p),
          logger: stderrFitLogger,
          flagsOnCallingThread: true,
        });
        progress.stop();
        process.stdout.write(`${describeRefit(summary)}\n`);
      } catch (error) {
        progress.stop();
        if (error instanceof PanelNotFoundError) throw new CliError(`panel-steward refit: ${error.message}`, 2);
        throw error;
      } finally {
        await runner.close();
        db.close();
      }
    });
}
