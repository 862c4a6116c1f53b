/**
 * What every route module can reach on the fastify instance: the store, the configuration, the
 * template renderer, the navigation registry and the import queue. Declared once here so route
 * plugins (including later ones such as server/routes/monitor*.ts) are typed.
 */
import type { Database } from 'better-sqlite3';
import type { StoreHealth } from '../../store/store-health.js';
import type { ImportQueue } from './import-queue.js';
import type { FailedAttemptBrake } from './token-guard.js';
import type { NavSection, ViewRenderer } from './views.js';

export interface AppConfig {
  /** The address the service listens on. Anything but loopback requires `accessToken`. */
  host: string;
  /** Access token for every read and write of panel data; null = none (loopback only). */
  accessToken: string | null;
  /** Largest accepted upload, in bytes. */
  uploadLimitBytes: number;
  /**
   * Where each start makes its private upload folder (default: the system's temporary folder).
   * Uploads on their way into the store live there until the response is sent.
   */
  uploadTmpDir: string;
  /** Folder holding layouts/, partials/, pages/ and static/. */
  templatesDir: string;
  /** Shown in the page footer. */
  version: string;
  /** fastify's logger option: false in tests, true (or pino options) when serving. */
  logger: boolean | Record<string, unknown>;
}

declare module 'fastify' {
  interface FastifyInstance {
    db: Database;
    appConfig: AppConfig;
    views: ViewRenderer;
    /** Sections of the site navigation; route modules push their own. */
    navSections: NavSection[];
    importQueue: ImportQueue;
    /** Found when the store was opened (or when a request met a damaged page); writes are refused while not ok. */
    storeHealth: StoreHealth;
    /** This start's private upload folder (mode 0700), removed when the app closes. */
    uploadDir: string;
    /** Wrong access tokens per client address (token mode). */
    failedAttempts: FailedAttemptBrake;
  }
  interface FastifyRequest {
    /** Temporary files written for this request; removed when the response is sent. */
    uploadTempPaths: string[] | null;
  }
}
