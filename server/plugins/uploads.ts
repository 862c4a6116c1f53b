/**
 * Getting an upload onto disk: multipart forms (the web page and API clients) and raw bodies
 * (`text/csv`, or an .xlsx as application/octet-stream) are streamed to a temporary file, never
 * held in memory, and cut off with a clear 413 above the size limit. They go into this start's
 * private folder (server/plugins/upload-dir.ts) as 0600 files, and are removed when the response
 * has been sent (or the client went away).
 */
import { randomUUID } from 'node:crypto';
import { createWriteStream } from 'node:fs';
import { rm } from 'node:fs/promises';
import { basename, extname, join } from 'node:path';
import { Transform } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import type { FastifyInstance, FastifyRequest } from 'fastify';
import fastifyMultipart from '@fastify/multipart';
import { AppError, formatBytes } from '../errors.js';
import { ensurePrivateDir, UploadDirError } from './upload-dir.js';

export interface ReceivedFile {
  /** Temporary file holding the upload. */
  path: string;
  /** The name the person's file had (base name only), for messages and the import log. */
  fileName: string;
  nBytes: number;
}

/** What the upload routes put in request.body. */
export interface UploadBody {
  fields: Record<string, string>;
  file: ReceivedFile | null;
  /** An optional panel settings file (JSON: scales, anchors, product roles). */
  settingsFile: ReceivedFile | null;
}

/** Raw-body content types accepted in place of a multipart form. */
export const RAW_UPLOAD_TYPES = [
  'text/csv',
  'text/plain',
  'application/csv',
  'application/octet-stream',
  'application/vnd.ms-excel',
  'application/vnd.openxmlformats-officedocument.spreadsheetml.sheet',
];

/** Multipart overhead allowed on top of the file limit before the Content-Length check refuses. */
const MULTIPART_OVERHEAD_BYTES = 64 * 1024;
const MAX_FIELD_BYTES = 16 * 1024;
/** A panel settings file is a few kilobytes; anything near this is not one. */
const MAX_SETTINGS_BYTES = 1024 * 1024;
const MAX_FILE_NAME_CHARS = 200;

/**
 * A display-safe file name: the last path component, control characters removed, length capped.
 * Never used to build a path (the temporary file has its own random name).
 */
export function cleanFileName(raw: string | undefined | null, fallback: string): string {
  // eslint-disable-next-line no-control-regex
  const withoutControls = (raw ?? '').replace(/[\u0000-\u001f\u007f]/g, '');
  const lastComponent = basename(withoutControls.replace(/\\/g, '/')).trim();
  const name = lastComponent === '' || lastComponent === '.' || lastComponent === '..' ? fallback : lastComponent;
  return name.slice(0, MAX_FILE_NAME_CHARS);
}

async function newTempPath(request: FastifyRequest, tmpDir: string, fileName: string): Promise<string> {
  await ensurePrivateDir(tmpDir);
  const extension = extname(fileName).toLowerCase().replace(/[^.a-z0-9]/g, '').slice(0, 8);
  const path = join(tmpDir, `panel-steward-upload-${randomUUID()}${extension}`);
  request.uploadTempPaths ??= [];
  request.uploadTempPaths.push(path);
  return path;
}

/** A new file only this user can read (0600); never an existing file or a link planted at that name. */
function privateWriteStream(path: string) {
  return createWriteStream(path, { flags: 'wx', mode: 0o600 });
}

function tooLarge(limitBytes: number): AppError {
  return new AppError('UPLOAD_TOO_LARGE', { limit: formatBytes(limitBytes) });
}

/** Counts bytes and stops the stream past the limit. */
function byteLimiter(limitBytes: number, counter: { nBytes: number }): Transform {
  return new Transform({
    transform(chunk: Buffer, _encoding, callback) {
      counter.nBytes += chunk.length;
      if (counter.nBytes > limitBytes) callback(tooLarge(limitBytes));
      else callback(null, chunk);
    },
  });
}

/** Refuses a request whose declared length is already above the limit, before reading it. */
export function checkDeclaredLength(request: FastifyRequest, limitBytes: number): void {
  const declared = Number(request.headers['content-length']);
  if (Number.isFinite(declared) && declared > limitBytes + MULTIPART_OVERHEAD_BYTES) throw tooLarge(limitBytes);
}

/** Reads a multipart form: text fields into `fields`, the part named "file" to a temp file. */
export async function receiveMultipart(request: FastifyRequest, limitBytes: number, tmpDir: string): Promise<UploadBody> {
  try {
    return await readParts(request, limitBytes, tmpDir);
  } catch (error) {
    throw asUploadError(error);
  }
}

/** A client that goes away mid-upload: its request, not the server, is at fault. */
const INTERRUPTED_CODES = new Set(['ECONNRESET', 'ECONNABORTED', 'ERR_STREAM_PREMATURE_CLOSE', 'FST_REQ_FILE_TOO_LARGE_PREMATURE']);

/**
 * The form parser's own errors ("Unexpected end of multipart data", "Malformed part header")
 * carry no status and no system error code: they describe the request, so they become a 400.
 * File-system errors (ENOSPC, EACCES: they have a code) stay server errors.
 */
function asUploadError(error: unknown, what = 'the multipart form'): unknown {
  if (error instanceof AppError || error instanceof UploadDirError) return error;
  const { code, statusCode, message } = (error ?? {}) as { code?: unknown; statusCode?: unknown; message?: unknown };
  if (typeof code === 'string' && INTERRUPTED_CODES.has(code)) {
    return new AppError('BAD_REQUEST', { detail: 'the upload was interrupted before the whole file arrived.' });
  }
  if (statusCode !== undefined || (typeof code === 'string' && code !== '')) return error;
  const detail = typeof message === 'string' ? message.slice(0, 200) : 'malformed form data';
  return new AppError('BAD_REQUEST', { detail: `${what} could not be read (${detail}).` });
}

async function readParts(request: FastifyRequest, limitBytes: number, tmpDir: string): Promise<UploadBody> {
  const fields: Record<string, string> = {};
  const files: { file: ReceivedFile | null; settings: ReceivedFile | null } = { file: null, settings: null };
  const parts = request.parts({ limits: { fileSize: limitBytes, fieldSize: MAX_FIELD_BYTES, fields: 50, parts: 60 } });
  for await (const part of parts) {
    if (part.type === 'field') {
      fields[part.fieldname] = typeof part.value === 'string' ? part.value : String(part.value);
      continue;
    }
    // One ratings file ("file") and one settings file ("settings") are read; other parts are
    // drained and ignored. A browser sends an empty part with no file name when the person chose
    // no file: that counts as no file.
    const slot = part.fieldname === 'file' || part.fieldname === 'settings' ? part.fieldname : null;
    if (slot === null || files[slot] !== null || !part.filename) {
      part.file.resume();
      continue;
    }
    const slotLimitBytes = slot === 'settings' ? Math.min(limitBytes, MAX_SETTINGS_BYTES) : limitBytes;
    const fileName = cleanFileName(part.filename, slot === 'settings' ? 'settings.json' : 'upload.csv');
    const path = await newTempPath(request, tmpDir, fileName);
    const counter = { nBytes: 0 };
    await pipeline(part.file, byteLimiter(slotLimitBytes, counter), privateWriteStream(path));
    if (part.file.truncated) throw tooLarge(limitBytes);
    files[slot] = { path, fileName, nBytes: counter.nBytes };
  }
  return { fields, file: files.file, settingsFile: files.settings };
}

/**
 * Registers, in the calling plugin's scope, the multipart parser and a raw-body parser that
 * streams text/csv (and spreadsheet) bodies to a temp file. The raw body becomes a ReceivedFile
 * whose name comes from `?fileName=`.
 */
export async function registerUploadParsers(app: FastifyInstance): Promise<void> {
  const { uploadLimitBytes } = app.appConfig;
  const uploadTmpDir = app.uploadDir;
  await app.register(fastifyMultipart, { limits: { fileSize: uploadLimitBytes } });
  app.addContentTypeParser(RAW_UPLOAD_TYPES, (request, payload, done) => {
    const query = request.query as Record<string, unknown>;
    const fileName = cleanFileName(typeof query.fileName === 'string' ? query.fileName : null, 'upload.csv');
    const counter = { nBytes: 0 };
    newTempPath(request, uploadTmpDir, fileName)
      .then((path) =>
        pipeline(payload, byteLimiter(uploadLimitBytes, counter), privateWriteStream(path)).then(() => {
          const body: ReceivedFile = { path, fileName, nBytes: counter.nBytes };
          done(null, body);
        }),
      )
      .catch((error: unknown) => {
        const failure = asUploadError(error, 'the request body');
        done(failure instanceof Error ? failure : new Error(String(failure)), undefined);
      });
  });
}

/** Removes a request's temporary files; registered once on the root instance. */
export function registerUploadCleanup(app: FastifyInstance): void {
  app.decorateRequest('uploadTempPaths', null);
  const cleanup = async (request: FastifyRequest): Promise<void> => {
    const paths = request.uploadTempPaths;
    if (paths === null || paths.length === 0) return;
    request.uploadTempPaths = [];
    await Promise.all(paths.map((path) => rm(path, { force: true }).catch(() => undefined)));
  };
  app.addHook('onResponse', cleanup);
  app.addHook('onRequestAbort', cleanup);
}
