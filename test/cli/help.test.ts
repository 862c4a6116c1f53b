import { Command } from 'commander';
import { describe, expect, it } from 'vitest';
import { registerCommandSummaries } from '../../server/cli/command-summaries.js';
import { registerAnalyzeCommand } from '../../server/cli/analyze-command.js';
import { registerBackupCommands } from '../../server/cli/backup-command.js';
import { registerCheckCommand } from '../../server/cli/check-command.js';
import { registerReportCommand } from '../../server/cli/report-command.js';
import { registerExportCommand } from '../../server/cli/export-command.js';
import { registerFlagsCommand } from '../../server/cli/flags-command.js';
import { registerImportCommand } from '../../server/cli/import-command.js';
import { registerRefitCommand } from '../../server/cli/refit-command.js';
import { registerServeCommand } from '../../server/cli/serve-command.js';

function newProgram(): Command {
  return new Command().name('panel-steward').description('Checks whether a trained sensory panel works as a measuring instrument.');
}

// The top-level help is written from the summaries without loading the command modules; it must
// read exactly as the help of the program with every module registered (order of main.ts).
describe('top-level help from command summaries', () => {
  it('lists every command as the modules register it', () => {
    const full = newProgram();
    for (const register of [
      registerAnalyzeCommand,
      registerServeCommand,
      registerImportCommand,
      registerExportCommand,
      registerBackupCommands,
      registerRefitCommand,
      registerFlagsCommand,
      registerCheckCommand,
      registerReportCommand,
    ]) {
      register(full);
    }
    const summaries = newProgram();
    registerCommandSummaries(summaries);
    expect(summaries.helpInformation()).toBe(full.helpInformation());
    expect(summaries.commands.map((c) => c.name())).toEqual(full.commands.map((c) => c.name()));
  });
});
