/**
 * Worker-thread side of readInWorker (read-in-worker.ts): reads and validates one file with
 * readCompactBatches and posts the compact batches, transferring their typed arrays.
 * At most `maxInFlight` batches are unacknowledged at a time, so a slow consumer holds the
 * reading back instead of letting messages pile up (memory stays flat however large the file).
 */
import { parentPort, workerData } from 'node:worker_threads';
import type { ScaleRange } from '../domain/ratings.js';
import { CompactBuilder, readCompactBatches, type CompactBatch } from './compact-batches.js';
import type { ReadWorkerData, ReadWorkerMessage } from './read-in-worker.js';

const data = workerData as ReadWorkerData;
const port = parentPort!;

let acknowledged = 0;
let wake: (() => void) | null = null;
port.on('message', (message: 'ack') => {
  if (message === 'ack') {
    acknowledged++;
    wake?.();
    wake = null;
  }
});

const post = (message: ReadWorkerMessage, transfer: ArrayBuffer[] = []): void => port.postMessage(message, transfer);

async function main(): Promise<void> {
  const known = new Map<string, ScaleRange>(data.scales.known);
  const fallback = data.scales.fallback;
  const scaleFor = (attribute: string): ScaleRange | null => known.get(attribute) ?? fallback;
  let posted = 0;
  /** Tests: fail once `failAfterBatches` batches are posted and taken, so the store has staged them. */
  const plannedFailure = async (): Promise<void> => {
    if (data.failAfterBatches === undefined || posted < data.failAfterBatches) return;
    while (acknowledged < posted) await new Promise<void>((resolve) => (wake = resolve));
    throw new Error('read worker: planned failure (test)');
  };
  const send = async (batch: CompactBatch): Promise<void> => {
    await plannedFailure();
    while (posted - acknowledged >= data.maxInFlight) await new Promise<void>((resolve) => (wake = resolve));
    post({ type: 'batch', batch }, [batch.keys.buffer as ArrayBuffer, batch.values.buffer as ArrayBuffer]);
    posted++;
  };
  for await (const batch of readCompactBatches(data.source, { fileName: data.fileName, sheet: data.sheet, scaleFor, today: data.today }, data.eventsPerBatch)) {
    await send(batch);
  }
  // The consumer expects at least one batch before 'done'.
  if (posted === 0) await send(new CompactBuilder().take());
  await plannedFailure();
  post({ type: 'done' });
}

await main();
