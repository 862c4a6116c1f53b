/**
 * `panel-steward` command-line entry. Each command lives in its own module and registers
 * itself on the program; errors reach the user as one plain message, never a stack trace.
 */
import { Command, CommanderError } from 'commander';
import { readFileSync } from 'node:fs';
import { CliError, unexpectedErrorMessage } from './cli-error.js';
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
  check: async () => (await import('./check-command.js')).registerCheckCommand,
  report: async () => (await import('./report-command.js')).registerReportCommand,
};

// A reader that stops early (`| head`) closes the pipe: end quietly instead of "write EPIPE".
process.stdout.on('error', (error: NodeJS.ErrnoException) => {
  if (error.code === 'EPIPE') process.exit(0);
  throw error;
});

/** The version of package.json, found by walking up from this module (source, build or bundle). */
function packageVersion(): string {
  for (let url = new URL('.', import.meta.url); ; url = new URL('..', url)) {
    try {
      const manifest = JSON.parse(readFileSync(new URL('package.json', url), 'utf8')) as { name?: string; version?: string };
      if (manifest.name === 'panel-steward') return manifest.version ?? 'unknown';
    } catch {
      // no package.json here: keep walking up
    }
    if (url.pathname === '/') return 'unknown';
  }
}

const program = new Command();
program
  .name('panel-steward')
  .description('Checks whether a trained sensory panel works as a measuring instrument.')
  .version(packageVersion(), '-V, --version', 'print the version and exit')
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
    process.stderr.write(`panel-steward: ${unexpectedErrorMessage(error, process.argv.slice(2))}\n`);
    process.exitCode = 1;
  }
}
