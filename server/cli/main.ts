/**
 * `panel-steward` command-line entry. Each command lives in its own module and registers
 * itself on the program; errors reach the user as one plain message, never a stack trace.
 */
import { Command, CommanderError } from 'commander';
import { readFileSync } from 'node:fs';
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

const requested = process.argv[2];
const isVersion = requested === '--version' || requested === '-V';
const loaders = isVersion ? [] : requested !== undefined && Object.hasOwn(COMMAND_MODULES, requested) ? [COMMAND_MODULES[requested]] : Object.values(COMMAND_MODULES);
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
