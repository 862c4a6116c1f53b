/**
 * The worker-thread pool that runs fits off the request path (piscina).
 *
 * Where the worker code comes from:
 * - built (`dist/server/fit-pool.js`): the compiled sibling `workers/fit-worker.js`;
 * - source (vitest, tsx): `workers/fit-worker.ts`, run in real worker threads with tsx as the
 *   loader (`--import tsx`), so tests exercise the same pool the service uses.
 * `mode: 'in-thread'` runs the same task functions on the calling thread (one task at a time,
 * yielding to the event loop between tasks); used by the CLI when threads are not wanted and
 * as the fallback when no worker file can be found.
 */
import { existsSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { fileURLToPath } from 'node:url';
import { Piscina } from 'piscina';
import { runFitTask } from './workers/fit-tasks.js';
import type { FitTask, FitTaskResult } from './workers/fit-task-types.js';

export type FitPoolMode = 'worker-threads' | 'in-thread';

export interface FitRunner {
  readonly mode: FitPoolMode;
  readonly threads: number;
  run<T extends FitTask>(task: T): Promise<FitTaskResult<T>>;
  close(): Promise<void>;
}

export interface FitPoolOptions {
  /** 'auto' (default): worker threads when the worker file is found, else in-thread. */
  mode?: 'auto' | FitPoolMode;
  /** Worker threads; default: available cores (at least 1, at most 8). */
  threads?: number;
}

/** The worker file next to this module: compiled .js when running from dist, else the .ts source. */
export function resolveWorkerFile(): { url: URL; needsTsLoader: boolean } | null {
  const compiled = new URL('./workers/fit-worker.js', import.meta.url);
  if (existsSync(fileURLToPath(compiled))) return { url: compiled, needsTsLoader: false };
  const source = new URL('./workers/fit-worker.ts', import.meta.url);
  if (existsSync(fileURLToPath(source))) return { url: source, needsTsLoader: true };
  return null;
}

export function createFitPool(options: FitPoolOptions = {}): FitRunner {
  const worker = options.mode === 'in-thread' ? null : resolveWorkerFile();
  if (options.mode === 'worker-threads' && !worker) throw new Error('The fit worker file was not found; run `npm run build`.');
  if (!worker) return new InThreadRunner();
  const threads = Math.max(1, Math.min(8, options.threads ?? availableParallelism()));
  return new PiscinaRunner(worker.url, worker.needsTsLoader, threads);
}

class PiscinaRunner implements FitRunner {
  readonly mode = 'worker-threads' as const;
  private readonly pool: Piscina;

  constructor(
    workerUrl: URL,
    needsTsLoader: boolean,
    readonly threads: number,
  ) {
    this.pool = new Piscina({
      filename: workerUrl.href,
      minThreads: 1,
      maxThreads: threads,
      // Idle threads stay warm for a while: a new session usually follows an import.
      idleTimeout: 60_000,
      execArgv: needsTsLoader ? ['--import', 'tsx'] : [],
    });
  }

  run<T extends FitTask>(task: T): Promise<FitTaskResult<T>> {
    return this.pool.run(task) as Promise<FitTaskResult<T>>;
  }

  async close(): Promise<void> {
    await this.pool.destroy();
  }
}

class InThreadRunner implements FitRunner {
  readonly mode = 'in-thread' as const;
  readonly threads = 0;
  private queue: Promise<unknown> = Promise.resolve();

  run<T extends FitTask>(task: T): Promise<FitTaskResult<T>> {
    // One at a time, each after a turn of the event loop, so requests still get answered.
    const next = this.queue.then(
      () =>
        new Promise<FitTaskResult<T>>((resolve, reject) =>
          setImmediate(() => {
            try {
              resolve(runFitTask(task));
            } catch (error) {
              reject(error);
            }
          }),
        ),
    );
    this.queue = next.catch(() => undefined);
    return next;
  }

  async close(): Promise<void> {
    await this.queue;
  }
}
