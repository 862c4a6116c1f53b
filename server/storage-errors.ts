/**
 * Failures of the disk under the store or the upload folder, told as what happened, where, and
 * what to do: a full disk, a store that cannot be written (permissions, a read-only mount), a
 * folder that is missing. The web service answers them with 507 or 503 in its own error shape;
 * the command line prints the same sentences.
 *
 * These messages name the store file or the upload folder: the person who can fix the problem
 * needs the path, and only someone allowed to use the service sees it.
 */
import { existsSync } from 'node:fs';
import { dirname } from 'node:path';
import { UploadDirError } from './plugins/upload-dir.js';

export type StorageProblemKind = 'disk-full' | 'read-only' | 'missing-folder' | 'no-access';

export interface StorageProblem {
  kind: StorageProblemKind;
  /** HTTP status: 507 Insufficient Storage for a full disk, 503 for the others (the service itself is fine). */
  status: 507 | 503;
  message: string;
}

export interface StoragePlaces {
  /** The store file as given at start-up (":memory:" for a test store). */
  storePath: string;
  /** This start's upload folder, when there is one. */
  uploadDir?: string;
}

interface SystemError {
  code?: unknown;
  path?: unknown;
  message?: unknown;
}

function isInside(path: string, folder: string | undefined): boolean {
  return folder !== undefined && (path === folder || path.startsWith(`${folder}/`) || path.startsWith(`${folder}\\`));
}

function storeName(places: StoragePlaces): string {
  return places.storePath === ':memory:' ? 'the in-memory store' : `the store ${places.storePath}`;
}

const READ_ONLY_STORE_HINT =
  'Check that the user running panel-steward may write the file, the folder it is in and the -wal and -shm files beside it, and that the disk is not mounted read-only.';

/** A full disk, a read-only or unreachable store or folder; null for anything else. */
export function describeStorageError(error: unknown, places: StoragePlaces): StorageProblem | null {
  if (error instanceof UploadDirError) return { kind: 'no-access', status: 503, message: error.message };
  const { code: rawCode, path: rawPath, message: rawMessage } = (error ?? {}) as SystemError;
  const code = typeof rawCode === 'string' ? rawCode : '';
  const message = typeof rawMessage === 'string' ? rawMessage : '';
  const path = typeof rawPath === 'string' ? rawPath : null;
  const inUploads = path !== null && isInside(path, places.uploadDir);

  if (code === 'SQLITE_FULL' || code.startsWith('SQLITE_FULL') || code === 'ENOSPC' || code === 'EDQUOT') {
    if (inUploads) {
      return {
        kind: 'disk-full',
        status: 507,
        message: `The disk holding the upload folder ${places.uploadDir} is full, so the upload could not be saved and nothing was imported. Free some space on that disk (or start the service with TMPDIR set to a folder on a disk with room), then send the file again.`,
      };
    }
    const where = path !== null && code.startsWith('E') ? `the file ${path}` : storeName(places);
    return {
      kind: 'disk-full',
      status: 507,
      message: `The disk holding ${where} is full, so nothing was written (an import is all or nothing). Free some space on that disk, then try again.`,
    };
  }
  if (code.startsWith('SQLITE_READONLY') || /readonly database/i.test(message)) {
    return { kind: 'read-only', status: 503, message: `${capitalise(storeName(places))} cannot be written: the file, its folder or the disk is read-only. ${READ_ONLY_STORE_HINT}` };
  }
  if (code === 'EROFS' || code === 'EACCES' || code === 'EPERM') {
    const what = inUploads ? `The upload folder ${places.uploadDir}` : path !== null ? `The file ${path}` : capitalise(storeName(places));
    return {
      kind: code === 'EROFS' && !inUploads ? 'read-only' : 'no-access',
      status: 503,
      message: `${what} cannot be written (${code === 'EROFS' ? 'the disk is mounted read-only' : 'permission denied'}). Check that the user running panel-steward may write there, and that the disk is not mounted read-only.`,
    };
  }
  if (code === 'ENOENT' && path !== null && !existsSync(dirname(path))) {
    const folder = dirname(path);
    const hint = inUploads ? 'It may have been removed by a temporary-file cleaner; restart the service to make a new one.' : 'Create it, or choose a path in a folder that exists.';
    return { kind: 'missing-folder', status: 503, message: `The folder ${folder} does not exist (it may have been moved or removed). ${hint}` };
  }
  if (code === 'SQLITE_CANTOPEN' || code.startsWith('SQLITE_CANTOPEN')) {
    return {
      kind: 'missing-folder',
      status: 503,
      message: `${capitalise(storeName(places))} cannot be opened: its folder ${dirname(places.storePath)} is missing or not accessible. Check that the folder exists and that the user running panel-steward may read and write it.`,
    };
  }
  return null;
}

function capitalise(text: string): string {
  return text.charAt(0).toUpperCase() + text.slice(1);
}
