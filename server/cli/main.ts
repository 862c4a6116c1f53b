/**
 * `panel-steward` command-line entry. Each command lives in its own module and registers
 * itself on the program; errors reach the user as one plain message, never a stack trace.
 */
import { Command, CommanderError } from 'commander';
import { CliError } from './cli-error.js';
import { registerCommandSummaries } from './command-summaries.js';
// Command modules, loaded lazily: a command (or `help COMMAND`) loads only its own module (the
// others bring the store, the service and the worker pool); the top-level help and unknown
// commands list every command from its summary without loading any module.
const COMMAND_MODULES: Record<string, () => Promise<(program: Command) => void>> = {
  analyze: async () => (await import('./analyze-command.js')).registerAnalyzeCommand,
  serve: async () => (await import('./serve-command.js')).registerServeCommand,
  import: async () => (await import('./import-command.js')).registerImportCommand,
  export: async () => (await import('./export-command.js')).registerExportCommand,
  backup: async () => (await import('./backup-command.js')).registerBackupCommands,
  restore: async () => (await import('./backup-command.js')).registerBackupCommands,
  refit: async () => (await import('./refit-command.js')).registerRefitCommand,
  flags: async () => (await import('./flags-command.js')).registerFlagsCommand,
};

const program = new Command();
program
  .name('panel-steward')
  .description('Checks whether a trained sensory panel works as a measuring instrument.')
  .showHelpAfterError()
  .exitOverride();

const isCommand = (word: string | undefined): word is string => word !== undefined && Object.hasOwn(COMMAND_MODULES, word);
const requested = process.argv[2] === 'help' && isCommand(process.argv[3]) ? process.argv[3] : process.argv[2];
if (isCommand(requested)) (await COMMAND_MODULES[requested]())(program);
else registerCommandSummaries(program);

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
