/**
 * Reading and validating a file on a worker thread, so that on a machine with two cores the
 * reader's work overlaps the store's staging on the main thread. The main thread receives
 * compact batches (compact-batches.ts) with their typed arrays transferred, not copied.
 *
 * Failure: if the worker cannot start, throws, or exits before it has read the whole file, the
 * stream ends with one 'file-unreadable' problem (the reader's catch-all message), so the
 * import is rejected and nothing is written. Stopping early (the consumer returns) ends the worker.
 */
import { existsSync } from 'node:fs';
import { createRequire } from 'node:module';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { ScaleRange } from '../domain/ratings.js';
import { EVENTS_PER_COMPACT_BATCH, type CompactBatch } from './compact-batches.js';
import { UNEXPECTED_READ_FAILURE, type InputSource } from './read-ratings.js';

/**
 * Scales the reader checks values against: `known` per attribute name (as [name, scale]
 * entries: stored scales and settings-file scales), else `fallback`; null = no scale (a
 * 'scale-missing' problem).
 */
export interface ScaleLookup {
  known: [string, ScaleRange][];
  fallback: ScaleRange | null;
}

export interface ReadInWorkerOptions {
  fileName: string;
  sheet?: string;
  scales: ScaleLookup;
  /** The caller's today (YYYY-MM-DD), for the future-date finding. */
  today?: string;
  /** Batches posted but not yet taken by the consumer, at most (bounds memory). Default 8. */
  maxInFlight?: number;
  /** Events per posted batch, at least (the last may be smaller). Default EVENTS_PER_COMPACT_BATCH. */
  eventsPerBatch?: number;
  /** Tests only: the worker throws after posting this many batches (before saying it is done). */
  failAfterBatches?: number;
}

/** What the worker receives (workerData). */
export interface ReadWorkerData {
  source: InputSource;
  fileName: string;
  sheet?: string;
  scales: ScaleLookup;
  today?: string;
  maxInFlight: number;
  eventsPerBatch: number;
  failAfterBatches?: number;
}

export type ReadWorkerMessage = { type: 'batch'; batch: CompactBatch } | { type: 'done' };

/** The worker file next to this module: compiled .js when running from dist, else the .ts source run with tsx. */
function resolveReadWorker(): { url: URL; needsTsLoader: boolean } | null {
  const compiled = new URL('./read-worker.js', import.meta.url);
  if (existsSync(fileURLToPath(compiled))) return { url: compiled, needsTsLoader: false };
  const source = new URL('./read-worker.ts', import.meta.url);
  if (existsSync(fileURLToPath(source))) return { url: source, needsTsLoader: true };
  return null;
}

/** True when the compiled worker is present (running from the build, not from the .ts sources). */
export function readerWorkerIsBuilt(): boolean {
  return resolveReadWorker()?.needsTsLoader === false;
}

/** URL of tsx's ESM API (its CommonJS twin cannot register the loader from a worker). */
function tsxApiUrl(): string {
  if (typeof import.meta.resolve === 'function') {
    try {
      return import.meta.resolve('tsx/esm/api');
    } catch {
      // fall through: resolve as CommonJS would, then take the ESM file beside it
    }
  }
  return pathToFileURL(createRequire(import.meta.url).resolve('tsx/esm/api').replace(/\.cjs$/, '.mjs')).href;
}

function failureBatch(fileName: string): CompactBatch {
  return {
    nRatings: 0,
    keys: new Int32Array(0),
    values: new Float64Array(0),
    newNames: [],
    others: [{ at: 0, event: { type: 'problem', cell: null, problem: { code: 'file-unreadable', file: fileName, row: null, column: null, message: UNEXPECTED_READ_FAILURE } } }],
    nMissing: 0,
    maxRow: 0,
  };
}

export interface WorkerReading {
  /** The compact batches in reading order; ends the worker when done or left early. */
  batches: AsyncGenerator<CompactBatch>;
  /** Ends the worker (when the batches will not be read, e.g. the content is already stored). */
  stop(): Promise<void>;
}

/**
 * Starts reading `source` on a worker thread at once (before the first batch is asked for).
 */
export function readInWorker(source: InputSource, options: ReadInWorkerOptions): WorkerReading {
  const resolved = resolveReadWorker();
  if (resolved === null) throw new Error('The reader worker file was not found; run `npm run build`.');
  const data: ReadWorkerData = {
    source,
    fileName: options.fileName,
    sheet: options.sheet,
    scales: options.scales,
    today: options.today,
    // Fewer, larger hand-overs: each one may wait for the other thread to be scheduled.
    maxInFlight: options.maxInFlight ?? 8,
    eventsPerBatch: options.eventsPerBatch ?? EVENTS_PER_COMPACT_BATCH,
    failAfterBatches: options.failAfterBatches,
  };
  // From the sources (tests, tsx), tsx's loader is registered inside the worker before the .ts
  // worker is imported (a worker's own entry is loaded before `--import` hooks apply in Node 20).
  const worker = resolved.needsTsLoader
    ? new Worker(
        `import(${JSON.stringify(tsxApiUrl())})` +
          `.then(({ register }) => { register(); return import(${JSON.stringify(resolved.url.href)}); });`,
        { eval: true, workerData: data },
      )
    : new Worker(resolved.url, { workerData: data });
  const queue: ReadWorkerMessage[] = [];
  let ended = false;
  let failed = false;
  let wake: (() => void) | null = null;
  const notify = (): void => {
    wake?.();
    wake = null;
  };
  worker.on('message', (message: ReadWorkerMessage) => {
    queue.push(message);
    notify();
  });
  worker.on('error', () => {
    failed = true;
    notify();
  });
  worker.on('exit', () => {
    ended = true;
    notify();
  });

  async function* batches(): AsyncGenerator<CompactBatch> {
    try {
      for (;;) {
        const message = queue.shift();
        if (message === undefined) {
          // Messages posted before an exit are delivered before the 'exit' event.
          if (failed || ended) {
            yield failureBatch(options.fileName);
            return;
          }
          await new Promise<void>((resolve) => (wake = resolve));
          continue;
        }
        if (message.type === 'done') return;
        yield message.batch;
        // Taken: the worker may post another.
        if (!ended) worker.postMessage('ack');
      }
    } finally {
      await worker.terminate();
    }
  }
  return { batches: batches(), stop: async () => void (await worker.terminate()) };
}
