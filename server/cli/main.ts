/**
 * `panel-steward` command-line entry. Each command lives in its own module and registers
 * itself on the program; errors reach the user as one plain message, never a stack trace.
 */
import { Command, CommanderError } from 'commander';
import { CliError, unexpectedErrorMessage } from './cli-error.js';
// Command modules, loaded lazily: a command loads only its own module (the others cost about
// 0.3 s of start-up); help and unknown commands load them all so every command is listed.
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

const requested = process.argv[2];
const loaders = requested !== undefined && Object.hasOwn(COMMAND_MODULES, requested) ? [COMMAND_MODULES[requested]] : Object.values(COMMAND_MODULES);
const registered = new Set<(program: Command) => void>();
for (const load of loaders) {
  const register = await load();
  if (registered.has(register)) continue; // backup and restore share one module
  registered.add(register);
  register(program);
}

try {
  await program.parseAsync(process.argv);
} catch (error) {
  if (error instanceof CommanderError) {
    process.exitCode = error.exitCode === 0 ? 0 : 2;
  } else if (error instanceof CliError) {
    process.stderr.write(`${error.message}\n`);
    process.exitCode = error.exitCode;
  } else {
    process.stderr.write(`panel-steward: ${unexpectedErrorMessage(error, process.argv.slice(2))}\n`);
    process.exitCode = 1;
  }
}
