/**
 * Opening the store for a command, with the plain messages for a damaged store, a full disk, a
 * read-only file or a missing folder. Its own module so that commands which only read the store
 * (`flags`, `export`) do not load the import stack (readers, spreadsheets, workers) to open it.
 */
import { openStore, type Database } from '../../store/open-store.js';
import { StoreDamagedError } from '../../store/store-health.js';
import { describeStorageError } from '../storage-errors.js';
import { CliError, resolveDbPath } from './cli-error.js';

export function openStoreForCli(dbOption: string | undefined): Database {
  const storePath = resolveDbPath(dbOption);
  try {
    return openStore(storePath);
  } catch (error) {
    // Names the store path and the way out; nothing was written.
    if (error instanceof StoreDamagedError) throw new CliError(error.message);
    const storage = describeStorageError(error, { storePath });
    if (storage !== null) throw new CliError(storage.message);
    // Other file-system errors name the path; say what to check instead.
    if (error instanceof Error && 'code' in error && typeof error.code === 'string' && error.code.startsWith('E')) {
      throw new CliError(`The store could not be opened (${error.code}): check that the folder of --db (or PANEL_STEWARD_DB) can be written.`);
    }
    const detail = error instanceof Error ? error.message : String(error);
    throw new CliError(`The store could not be opened: ${detail}`);
  }
}
