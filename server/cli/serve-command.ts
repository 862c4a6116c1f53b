/**
 * `panel-steward serve [--db PATH] [--host H] [--port N] [--demo] [--upload-limit-mb N]`
 *
 * Listens on 127.0.0.1:8080 by default (HOST, PORT and PANEL_STEWARD_DB are honoured). Any other
 * address makes the service reachable from the lab network, so it then requires an access token
 * (PANEL_STEWARD_TOKEN, or one generated and printed here) and says so. SIGTERM and SIGINT stop
 * it cleanly: new imports are refused and the import in progress finishes before the store closes.
 */
import { randomBytes } from 'node:crypto';
import type { Command } from 'commander';
import type { FastifyInstance } from 'fastify';
import { openStore, storeHealthOf, type Database } from '../../store/open-store.js';
import { damagedStoreMessage } from '../../store/store-health.js';
import { readPanelSummaries } from '../../store/read-panels.js';
import { buildApp, DEFAULT_UPLOAD_LIMIT_BYTES } from '../app.js';
import { isLoopbackHost } from '../plugins/security.js';
import { weakTokenReason } from '../plugins/token-guard.js';
import { describeStorageError } from '../storage-errors.js';
import { CliError, resolveDbPath } from './cli-error.js';
import { COMMAND_SUMMARIES } from './command-summaries.js';

export interface ServeOptions {
  db?: string;
  host?: string;
  port?: string;
  demo?: boolean;
  uploadLimitMb?: string;
}

export interface RunningServer {
  app: FastifyInstance;
  db: Database;
  url: string;
  /** Refuses new imports, waits for the running one, closes the server and the store. */
  stop: () => Promise<void>;
}

interface Output {
  write(text: string): unknown;
}

function parsePort(text: string): number {
  const port = /^\d{1,5}$/.test(text.trim()) ? Number(text) : NaN;
  if (!(port >= 0 && port <= 65535)) throw new CliError(`The port must be a whole number from 0 to 65535 (got "${text}").`, 2);
  return port;
}

function parseUploadLimit(text: string | undefined): number {
  if (text === undefined) return DEFAULT_UPLOAD_LIMIT_BYTES;
  const megabytes = Number(text);
  if (!(megabytes > 0 && megabytes <= 4096)) throw new CliError(`--upload-limit-mb must be a number of megabytes from 1 to 4096 (got "${text}").`, 2);
  return Math.round(megabytes * 1024 * 1024);
}

type DemoLoader = (db: Database) => Promise<{ counts: { ratings: number } }[]>;

/**
 * The demo generator is loaded only for --demo (it is not needed to serve real data). A build
 * without it says so instead of failing with a module error.
 */
async function demoLoader(): Promise<DemoLoader> {
  const modulePath = '../../demo/load-demo.js';
  try {
    const demo = (await import(modulePath)) as { loadDemoPanel?: DemoLoader };
    if (typeof demo.loadDemoPanel === 'function') return demo.loadDemoPanel;
  } catch (error) {
    if ((error as { code?: string }).code !== 'ERR_MODULE_NOT_FOUND') throw error;
  }
  throw new CliError('The demo panel is not part of this build; start without --demo and upload a file at /upload.');
}

function urlFor(host: string, port: number): string {
  const shownHost = host.includes(':') ? `[${host}]` : host;
  return `http://${shownHost}:${port}/`;
}

/** Starts the service; resolves once it listens. */
export async function startServer(options: ServeOptions, out: Output = process.stdout): Promise<RunningServer> {
  // An empty variable counts as unset (a shell `HOST= npm start` should not mean "no address").
  const host = options.host || process.env.HOST || '127.0.0.1';
  const port = parsePort(options.port || process.env.PORT || '8080');
  const uploadLimitBytes = parseUploadLimit(options.uploadLimitMb);
  const dbPath = resolveDbPath(options.db || process.env.PANEL_STEWARD_DB || undefined);
  const isLoopback = isLoopbackHost(host);
  const envToken = process.env.PANEL_STEWARD_TOKEN?.trim() || null;
  const weakToken = envToken === null ? null : weakTokenReason(envToken);
  if (weakToken !== null) throw new CliError(`PANEL_STEWARD_TOKEN is refused. ${weakToken}`, 2);
  const accessToken = envToken ?? (isLoopback ? null : randomBytes(24).toString('base64url'));

  let db: Database;
  try {
    // A damaged store is served read-only: /healthz answers 503 and every write is refused.
    db = openStore(dbPath, { ifDamaged: 'read-only' });
  } catch (error) {
    const storage = describeStorageError(error, { storePath: dbPath });
    throw new CliError(storage?.message ?? `Could not open the store ${dbPath}: ${error instanceof Error ? error.message : String(error)}`);
  }

  const health = storeHealthOf(db);
  if (!health.ok) out.write(`Warning: ${damagedStoreMessage(dbPath, health.problems)}\nServing it read-only until then.\n`);

  if (options.demo && health.ok && readPanelSummaries(db).length === 0) {
    out.write('The store is empty: loading the demo panel (this takes a few seconds)…\n');
    const reports = await (await demoLoader())(db);
    const nRatings = reports.reduce((sum, report) => sum + report.counts.ratings, 0);
    out.write(`Demo panel loaded: ${reports.length} weekly files, ${nRatings} ratings.\n`);
  }

  const app = await buildApp({
    db,
    config: { host, accessToken, uploadLimitBytes, logger: { level: process.env.LOG_LEVEL ?? 'info' } },
  });
  try {
    await app.listen({ host, port });
  } catch (error) {
    await app.close();
    db.close();
    const code = (error as { code?: string }).code;
    if (code === 'EADDRINUSE') throw new CliError(`Port ${port} on ${host} is already in use. Choose another with --port or PORT.`);
    if (code === 'EADDRNOTAVAIL') throw new CliError(`This computer has no address ${host}. Use --host 127.0.0.1 or one of its own addresses.`);
    throw error;
  }
  const address = app.server.address();
  const actualPort = typeof address === 'object' && address !== null ? address.port : port;
  const url = urlFor(host, actualPort);

  // One write, the address last, so the whole notice arrives together.
  const notice: string[] = [];
  if (accessToken !== null) {
    notice.push(
      isLoopback
        ? 'An access token is set (PANEL_STEWARD_TOKEN): every page and API call needs it.'
        : 'This address is reachable from other computers, so every page and API call needs the access token.',
    );
    if (envToken === null) notice.push(`Access token: ${accessToken}`, '(Set PANEL_STEWARD_TOKEN to choose your own.)');
    notice.push('Browsers sign in at /login; API clients send "Authorization: Bearer <token>".');
  }
  notice.push(`panel-steward is serving ${url} (store: ${dbPath})`);
  out.write(`${notice.join('\n')}\n`);

  let stopping: Promise<void> | null = null;
  const stop = () => {
    stopping ??= (async () => {
      if (app.importQueue.size > 0) out.write('Stopping: waiting for the import in progress to finish…\n');
      await app.close(); // preClose waits for the import queue
      db.close();
    })();
    return stopping;
  };
  return { app, db, url, stop };
}

export function registerServeCommand(program: Command): void {
  program
    .command('serve')
    .description(COMMAND_SUMMARIES.serve.description)
    .option('--db <path>', 'store file (default: PANEL_STEWARD_DB or data/panel-steward.db)')
    .option('--host <address>', 'address to listen on (default: HOST or 127.0.0.1)')
    .option('--port <number>', 'port to listen on (default: PORT or 8080; 0 = any free port)')
    .option('--demo', 'load the demo panel when the store is empty')
    .option('--upload-limit-mb <number>', 'largest accepted upload in megabytes (default 50)')
    .action(async (options: ServeOptions) => {
      const server = await startServer(options);
      await new Promise<void>((resolve) => {
        const onSignal = (signal: NodeJS.Signals) => {
          process.stdout.write(`${signal} received: stopping.\n`);
          server.stop().then(resolve, (error: unknown) => {
            process.stderr.write(`panel-steward: could not stop cleanly: ${error instanceof Error ? error.message : String(error)}\n`);
            process.exitCode = 1;
            resolve();
          });
        };
        process.once('SIGTERM', onSignal);
        process.once('SIGINT', onSignal);
      });
    });
}
