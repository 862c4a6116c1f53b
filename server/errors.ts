/**
 * Every error the service can answer with, in one registry: a code, its HTTP status and a
 * message template. JSON errors always have one shape, `{ ok: false, status, code, error,
 * errors: [...] }`, and HTML errors render the same message. Messages never contain stack
 * traces: 5xx answers say only that something went wrong (the full context goes to the log),
 * except a full disk, a read-only store or a missing folder, which name the store file or
 * upload folder and what to do (server/storage-errors.ts).
 */

import { describeStorageError, type StorageProblemKind } from './storage-errors.js';

export const ERROR_REGISTRY = {
  NOT_FOUND: { status: 404, message: 'There is no page at {path}.' },
  PANEL_NOT_FOUND: { status: 404, message: 'There is no panel named "{panel}".' },
  SESSION_NOT_FOUND: { status: 404, message: 'Panel "{panel}" has no session labelled "{session}".' },
  IMPORT_NOT_FOUND: { status: 404, message: 'There is no import with number {importId}.' },
  BAD_REQUEST: { status: 400, message: 'The request is not valid: {detail}' },
  UPLOAD_MISSING_FILE: {
    status: 400,
    message: 'No file was sent. Send the file in a multipart field named "file", or as a text/csv request body.',
  },
  UPLOAD_BAD_OPTION: { status: 400, message: 'The option {option} is not valid: {detail}' },
  UPLOAD_TOO_LARGE: {
    status: 413,
    message: 'The upload is larger than the limit of {limit}. Split the file into smaller files (for example by month) and import them one after another.',
  },
  BODY_TOO_LARGE: {
    status: 413,
    message: 'The request body is larger than the limit of {limit} for this address.',
  },
  UNSUPPORTED_MEDIA_TYPE: {
    status: 415,
    message: 'This content type is not accepted here. Send multipart/form-data with a "file" field, or a text/csv body.',
  },
  IMPORT_REJECTED: { status: 422, message: '{detail}' },
  QUARANTINE_NOT_FOUND: { status: 404, message: 'There is no quarantined cell with number {cellId}.' },
  QUARANTINE_REFUSED: { status: 409, message: '{detail}' },
  AUTH_REQUIRED: {
    status: 401,
    message: 'This service needs its access token. Send "Authorization: Bearer <token>", or sign in at /login.',
  },
  AUTH_INVALID: { status: 401, message: 'The access token is not correct.' },
  TOO_MANY_ATTEMPTS: {
    status: 429,
    message: 'Too many wrong access tokens came from this computer. Wait {seconds} seconds, then try again with the right token.',
  },
  CSRF_INVALID: {
    status: 403,
    message: 'The form had expired or did not come from this service. Reload the page and send it again.',
  },
  CROSS_SITE_REQUEST: { status: 403, message: 'Requests that change data must come from this service\'s own pages.' },
  HOST_NOT_ALLOWED: {
    status: 403,
    message: 'This service only answers requests addressed to this computer (localhost or 127.0.0.1).',
  },
  METHOD_NOT_ALLOWED: { status: 405, message: 'The method {method} is not allowed at {path}.' },
  SHUTTING_DOWN: { status: 503, message: 'The service is shutting down; try again when it is back.' },
  STORE_BUSY: { status: 503, message: 'The store is busy with another change; try again in a moment.' },
  STORE_DAMAGED: { status: 503, message: '{detail}' },
  DISK_FULL: { status: 507, message: '{detail}' },
  STORE_READ_ONLY: { status: 503, message: '{detail}' },
  STORAGE_UNAVAILABLE: { status: 503, message: '{detail}' },
  INTERNAL: { status: 500, message: 'Something went wrong on the server. The details are in the service log.' },
} as const satisfies Record<string, { status: number; message: string }>;

export type ErrorCode = keyof typeof ERROR_REGISTRY;

/** One item of an error list: a problem in an input file (file/row/column) or a plain message. */
export interface ErrorItem {
  message: string;
  code?: string;
  file?: string;
  row?: number | null;
  column?: string | null;
  value?: string | null;
}

/** The JSON body of every error answer. */
export interface ErrorBody {
  ok: false;
  status: number;
  code: ErrorCode;
  error: string;
  errors: ErrorItem[];
}

function fillTemplate(template: string, values: Record<string, string | number>): string {
  return template.replace(/\{(\w+)\}/g, (whole, key: string) => (key in values ? String(values[key]) : whole));
}

/** An error meant for the person making the request; its message is safe to show. */
export class AppError extends Error {
  readonly status: number;
  readonly errors: ErrorItem[];

  constructor(
    readonly code: ErrorCode,
    values: Record<string, string | number> = {},
    errors: ErrorItem[] = [],
  ) {
    super(fillTemplate(ERROR_REGISTRY[code].message, values));
    this.name = 'AppError';
    this.status = ERROR_REGISTRY[code].status;
    this.errors = errors;
  }

  toBody(): ErrorBody {
    return {
      ok: false,
      status: this.status,
      code: this.code,
      error: this.message,
      errors: this.errors.length > 0 ? this.errors : [{ message: this.message }],
    };
  }
}

/** Shape of errors thrown by fastify and its plugins (validation, limits, content types). */
interface FrameworkError {
  code?: string;
  statusCode?: number;
  validation?: unknown;
  message?: string;
}

export interface ErrorContext {
  uploadLimitBytes: number;
  path: string;
  method: string;
  /** The body limit that applied to this request's JSON or form body. */
  bodyLimitBytes?: number;
  /** The store file and this start's upload folder, named in disk and permission messages. */
  storePath?: string;
  uploadDir?: string;
}

const STORAGE_CODES: Record<StorageProblemKind, ErrorCode> = {
  'disk-full': 'DISK_FULL',
  'read-only': 'STORE_READ_ONLY',
  'missing-folder': 'STORAGE_UNAVAILABLE',
  'no-access': 'STORAGE_UNAVAILABLE',
};

/** File sizes for messages: "50 MB", "512 KB". */
export function formatBytes(nBytes: number): string {
  if (nBytes >= 1024 * 1024) return `${Number((nBytes / (1024 * 1024)).toFixed(1))} MB`;
  if (nBytes >= 1024) return `${Number((nBytes / 1024).toFixed(1))} KB`;
  return `${nBytes} bytes`;
}

/**
 * Maps anything thrown while handling a request to a registered error. Framework errors with a
 * 4xx status keep a safe, rewritten message; everything else becomes INTERNAL (or STORE_BUSY for
 * SQLite's lock errors) so no internal text leaks to the person.
 */
export function toAppError(error: unknown, context: ErrorContext): AppError {
  if (error instanceof AppError) return error;
  const framework = (error ?? {}) as FrameworkError;
  const code = framework.code ?? '';
  const storage = describeStorageError(error, { storePath: context.storePath ?? ':memory:', uploadDir: context.uploadDir });
  if (storage !== null) return new AppError(STORAGE_CODES[storage.kind], { detail: storage.message });
  if (code === 'SQLITE_BUSY' || code === 'SQLITE_LOCKED' || code.startsWith('SQLITE_BUSY')) return new AppError('STORE_BUSY');
  if (code === 'FST_CSRF_INVALID_TOKEN' || code === 'FST_CSRF_MISSING_SECRET') return new AppError('CSRF_INVALID');
  if (code === 'FST_FIELDS_LIMIT' || code === 'FST_PARTS_LIMIT' || code === 'FST_FILES_LIMIT') {
    return new AppError('BAD_REQUEST', { detail: 'the form has too many fields or files; send one file in the field "file".' });
  }
  // A JSON or form body above the route's own limit (the upload limit is for files only).
  if (code === 'FST_ERR_CTP_BODY_TOO_LARGE' && context.bodyLimitBytes !== undefined) {
    return new AppError('BODY_TOO_LARGE', { limit: formatBytes(context.bodyLimitBytes) });
  }
  if (code === 'FST_ERR_CTP_BODY_TOO_LARGE' || code === 'FST_REQ_FILE_TOO_LARGE' || framework.statusCode === 413) {
    return new AppError('UPLOAD_TOO_LARGE', { limit: formatBytes(context.uploadLimitBytes) });
  }
  if (code === 'FST_ERR_CTP_INVALID_MEDIA_TYPE' || framework.statusCode === 415) return new AppError('UNSUPPORTED_MEDIA_TYPE');
  // Node refused a header built from the request (a control or non-Latin-1 character in it).
  if (code === 'ERR_INVALID_CHAR' || code === 'ERR_HTTP_INVALID_HEADER_VALUE' || code === 'ERR_INVALID_HTTP_TOKEN') {
    return new AppError('BAD_REQUEST', { detail: 'the address holds characters that cannot be sent back (control or invisible characters).' });
  }
  const status = framework.statusCode ?? 500;
  if (status >= 400 && status < 500) {
    // fastify's own 4xx messages (schema validation, malformed JSON or multipart) name no paths;
    // they are kept, cut short, as the detail of a plain 400.
    const detail = typeof framework.message === 'string' && framework.message.length > 0 ? framework.message.slice(0, 300) : 'malformed request';
    if (status === 405) return new AppError('METHOD_NOT_ALLOWED', { method: context.method, path: context.path });
    if (status === 503) return new AppError('SHUTTING_DOWN');
    return new AppError('BAD_REQUEST', { detail });
  }
  return new AppError('INTERNAL');
}
