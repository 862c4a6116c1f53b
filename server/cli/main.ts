/**
 * `panel-steward` command-line entry. Each command lives in its own module and registers
 * itself on the program; errors reach the user as one plain message, never a stack trace.
 */
import { Command, CommanderError } from 'commander';
import { CliError } from './cli-error.js';
// Command modules (one import and one registration line each):
// ---- commands ----
import { registerAnalyzeCommand } from './analyze-command.js';
import { registerServeCommand } from './serve-command.js';
import { registerImportCommand } from './import-command.js';
import { registerExportCommand } from './export-command.js';
import { registerBackupCommands } from './backup-command.js';
import { registerRefitCommand } from './refit-command.js';
import { registerFlagsCommand } from './flags-command.js';

const program = new Command();
program
  .name('panel-steward')
  .description('Checks whether a trained sensory panel works as a measuring instrument.')
  .showHelpAfterError()
  .exitOverride();

// ---- registrations ----
registerAnalyzeCommand(program);
registerServeCommand(program);
registerImportCommand(program);
registerExportCommand(program);
registerBackupCommands(program);
registerRefitCommand(program);
registerFlagsCommand(program);

try {
  await program.parseAsync(process.argv);
} catch (error) {
  if (error instanceof CommanderError) {
    process.exitCode = error.exitCode === 0 ? 0 : 2;
  } else if (error instanceof CliError) {
    process.stderr.write(`${error.message}\n`);
    process.exitCode = error.exitCode;
  } else {
    const message = error instanceof Error ? error.message : String(error);
    process.stderr.write(`panel-steward: ${message}\n`);
    process.exitCode = 1;
  }
}
