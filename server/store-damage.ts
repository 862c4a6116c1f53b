import { basename } from 'node:path';
import { damagedStoreMessage, type StoreHealth } from '../store/store-health.js';
import { AppError } from './errors.js';

/**
 * The answer for a damaged store: the file name only (pages never show paths), what SQLite
 * found (page numbers, no paths) and the way out.
 */
export function storeDamagedError(health: StoreHealth): AppError {
  const storeName = health.path === ':memory:' ? 'in memory' : basename(health.path);
  return new AppError(
    'STORE_DAMAGED',
    { detail: damagedStoreMessage(storeName, health.problems) },
    health.problems.slice(0, 20).map((line) => ({ code: 'store-damaged', message: line })),
  );
}
