/**
 * The folder uploads stream into on their way to the store: one private folder per service
 * start, made with mkdtemp (mode 0700, a random name) under the system's temporary folder, so
 * no other local user can read, rename or plant files in it; the files are 0600.
 *
 * A killed service cannot remove its folder, so each start removes the folders of earlier
 * starts: only names with our prefix, only real folders (never through a symbolic link) owned by
 * this user, and only when the process that made the folder is gone. The fixed folder that
 * earlier versions shared (`panel-steward-uploads`) loses its files older than an hour.
 */
import { lstat, mkdir, mkdtemp, readdir, rm, rmdir } from 'node:fs/promises';
import { join } from 'node:path';

export const UPLOAD_DIR_PREFIX = 'panel-steward-uploads-';
const LEGACY_DIR_NAME = 'panel-steward-uploads';
const LEGACY_FILE_PREFIX = 'panel-steward-upload-';
/** pid, then the owning process's start time (ms since 1970), then mkdtemp's random suffix. */
const DIR_NAME = /^panel-steward-uploads-(\d+)-(\d+)-[A-Za-z0-9]{6}$/;

/** When this process started (ms since 1970): tells our own folders from a dead process's with the same pid. */
export const PROCESS_START_MS = Math.round(performance.timeOrigin);

export class UploadDirError extends Error {
  constructor(
    message: string,
    readonly path: string,
  ) {
    super(message);
    this.name = 'UploadDirError';
  }
}

function currentUid(): number | null {
  return typeof process.getuid === 'function' ? process.getuid() : null;
}

function isAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (error) {
    // EPERM: the process exists but belongs to someone else.
    return (error as NodeJS.ErrnoException).code === 'EPERM';
  }
}

/** Whether the folder is a real folder (not a link), owned by this user, closed to others. */
async function isPrivateDir(path: string): Promise<boolean> {
  const stats = await lstat(path);
  const uid = currentUid();
  return stats.isDirectory() && !stats.isSymbolicLink() && (uid === null || stats.uid === uid) && (uid === null || (stats.mode & 0o077) === 0);
}

/**
 * Makes sure the folder exists and is private before a file is written into it. A temp cleaner
 * may have removed it while the service ran: it is made again (0700), but a folder someone else
 * made at that name in the meantime is refused, not used.
 */
export async function ensurePrivateDir(path: string): Promise<void> {
  try {
    await mkdir(path, { mode: 0o700 });
  } catch (error) {
    if ((error as NodeJS.ErrnoException).code !== 'EEXIST') throw error;
  }
  if (!(await isPrivateDir(path))) {
    throw new UploadDirError(`The upload folder ${path} is not a private folder of this user; restart the service to get a new one.`, path);
  }
}

/** Legacy files younger than this may belong to an older version's upload still in progress. */
const LEGACY_FILE_MIN_AGE_MS = 60 * 60_000;

const sweptBaseDirs = new Map<string, Promise<string[]>>();

/**
 * Removes, once per process and folder, what earlier starts left there (a folder with thousands
 * of entries takes about 0.1 s to list; apps built again in the same process need not repeat it).
 */
export function removeLeftoverUploadDirsOnce(baseDir: string): Promise<string[]> {
  let sweep = sweptBaseDirs.get(baseDir);
  if (sweep === undefined) {
    sweep = removeLeftoverUploadDirs(baseDir);
    sweptBaseDirs.set(baseDir, sweep);
  }
  return sweep;
}

/** Removes folders (and legacy files) left by earlier starts; returns what was removed. */
export async function removeLeftoverUploadDirs(baseDir: string): Promise<string[]> {
  const uid = currentUid();
  if (uid === null) return []; // ownership cannot be checked (Windows): leave everything alone
  let names: string[];
  try {
    names = await readdir(baseDir);
  } catch {
    return [];
  }
  const removed: string[] = [];
  for (const name of names) {
    const path = join(baseDir, name);
    try {
      if (name === LEGACY_DIR_NAME) {
        removed.push(...(await removeLegacyFiles(path, uid)));
        continue;
      }
      const match = DIR_NAME.exec(name);
      if (match === null) continue;
      const pid = Number(match[1]);
      const startMs = Number(match[2]);
      const ours = pid === process.pid && startMs === PROCESS_START_MS;
      const leftOver = pid === process.pid ? startMs < PROCESS_START_MS : !isAlive(pid);
      if (ours || !leftOver) continue;
      const stats = await lstat(path);
      if (!stats.isDirectory() || stats.isSymbolicLink() || stats.uid !== uid) continue;
      // rm does not follow symbolic links inside the folder: it removes the links themselves.
      await rm(path, { recursive: true, force: true });
      removed.push(path);
    } catch {
      // Gone meanwhile, or not ours to remove: leave it.
    }
  }
  return removed;
}

/** Files in the shared folder of earlier versions, an hour older than this start (never one an older version still reads). */
async function removeLegacyFiles(dir: string, uid: number): Promise<string[]> {
  const stats = await lstat(dir);
  if (!stats.isDirectory() || stats.isSymbolicLink() || stats.uid !== uid) return [];
  const removed: string[] = [];
  for (const name of await readdir(dir)) {
    if (!name.startsWith(LEGACY_FILE_PREFIX)) continue;
    const path = join(dir, name);
    const file = await lstat(path);
    if (!file.isFile() || file.uid !== uid || file.mtimeMs >= PROCESS_START_MS - LEGACY_FILE_MIN_AGE_MS) continue;
    await rm(path, { force: true });
    removed.push(path);
  }
  await rmdir(dir).catch(() => undefined); // only when empty
  return removed;
}

/** Creates this start's private upload folder under `baseDir` (made 0700 if missing). */
export async function createUploadDir(baseDir: string): Promise<string> {
  await mkdir(baseDir, { recursive: true, mode: 0o700 });
  const path = await mkdtemp(join(baseDir, `${UPLOAD_DIR_PREFIX}${process.pid}-${PROCESS_START_MS}-`));
  if (!(await isPrivateDir(path))) throw new UploadDirError(`The upload folder ${path} could not be made private (mode 0700).`, path);
  return path;
}
