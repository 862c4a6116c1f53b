/**
 * One path into the store for the API and the web form: read the options a person gave
 * (form fields or query parameters), run `importRatings` through the import queue, and turn
 * the store's ImportReport into an HTTP status.
 */
import { readFile } from 'node:fs/promises';
import type { FastifyInstance } from 'fastify';
import type { ScaleRange } from '../../domain/ratings.js';
import type { ImportReport } from '../../store/import-core.js';
import { importRatings } from '../../store/import-ratings.js';
import { checkName } from '../../ingest/names.js';
import { validatePanelConfig, type PanelConfigFile } from '../../store/panel-config.js';
import { AppError, type ErrorItem } from '../errors.js';
import type { ReceivedFile } from '../plugins/uploads.js';

export interface ImportOptions {
  scale: ScaleRange | undefined;
  quarantine: boolean;
  sheet: string | undefined;
}

const MAX_NAME_CHARS = 200;
const TRUE_WORDS = new Set(['true', 'on', '1', 'yes']);
const FALSE_WORDS = new Set(['', 'false', 'off', '0', 'no']);

function textOption(raw: unknown): string {
  if (raw === undefined || raw === null) return '';
  if (Array.isArray(raw)) return textOption(raw[raw.length - 1]);
  return String(raw).trim();
}

/** A decimal number as people type it: "10", "-5", "7.5" or "7,5". */
function parseScaleEnd(text: string): number | null {
  if (!/^[+-]?(\d+([.,]\d*)?|[.,]\d+)$/.test(text)) return null;
  const value = Number(text.replace(',', '.'));
  return Number.isFinite(value) ? value : null;
}

/**
 * Reads quarantine, scaleMin/scaleMax and sheet. Every bad option is listed (not just the
 * first), as UPLOAD_BAD_OPTION with the option name in `column`.
 */
export function parseImportOptions(source: Record<string, unknown>): ImportOptions {
  const problems: ErrorItem[] = [];
  const quarantineText = textOption(source.quarantine).toLowerCase();
  let quarantine = false;
  if (TRUE_WORDS.has(quarantineText)) quarantine = true;
  else if (!FALSE_WORDS.has(quarantineText)) {
    problems.push({ column: 'quarantine', message: 'quarantine must be true or false.' });
  }

  const minText = textOption(source.scaleMin);
  const maxText = textOption(source.scaleMax);
  let scale: ScaleRange | undefined;
  if (minText !== '' || maxText !== '') {
    const min = parseScaleEnd(minText);
    const max = parseScaleEnd(maxText);
    if (minText === '' || maxText === '') {
      problems.push({ column: minText === '' ? 'scaleMin' : 'scaleMax', message: 'Give both ends of the scale (scaleMin and scaleMax), or neither.' });
    } else if (min === null || max === null) {
      problems.push({ column: min === null ? 'scaleMin' : 'scaleMax', message: 'The scale ends must be numbers, for example 0 and 10.' });
    } else if (!(min < max)) {
      problems.push({ column: 'scaleMin', message: `The scale must go from a smaller to a larger number (got ${min} to ${max}).` });
    } else {
      scale = { min, max };
    }
  }

  const sheetText = textOption(source.sheet);
  if (sheetText.length > MAX_NAME_CHARS) problems.push({ column: 'sheet', message: `The sheet name is longer than ${MAX_NAME_CHARS} characters.` });

  if (problems.length > 0) {
    throw new AppError('UPLOAD_BAD_OPTION', { option: problems.map((p) => p.column).join(', '), detail: problems[0].message }, problems);
  }
  return { scale, quarantine, sheet: sheetText === '' ? undefined : sheetText };
}

/**
 * A panel name from a path or a form field: 1–200 characters, no control, invisible or bidi
 * characters, not only punctuation (not "." or ".."); returned in Unicode NFC.
 */
export function checkPanelName(raw: unknown): string {
  const name = textOption(raw);
  const checked = checkName(name, 'panel name');
  if (!checked.ok) throw new AppError('UPLOAD_BAD_OPTION', { option: 'panel', detail: checked.reason }, [{ column: 'panel', message: checked.reason }]);
  // eslint-disable-next-line no-control-regex
  if (name === '' || name.length > MAX_NAME_CHARS || /[\u0000-\u001f\u007f]/.test(name)) {
    throw new AppError(
      'UPLOAD_BAD_OPTION',
      { option: 'panel', detail: `a panel name is 1 to ${MAX_NAME_CHARS} characters of text.` },
      [{ column: 'panel', message: `Give the panel a name of 1 to ${MAX_NAME_CHARS} characters.` }],
    );
  }
  return checked.name;
}

/**
 * Reads an uploaded panel settings file (JSON). Its problems are listed like bad options, each
 * naming the file and the place in it (as a JSON path in `column`).
 */
export async function readSettingsUpload(file: ReceivedFile): Promise<PanelConfigFile> {
  const text = (await readFile(file.path, 'utf8')).replace(/^\uFEFF/, '');
  let parsed: unknown;
  try {
    parsed = JSON.parse(text);
  } catch {
    throw new AppError('UPLOAD_BAD_OPTION', { option: 'settings', detail: `${file.fileName} is not valid JSON.` }, [
      { file: file.fileName, column: null, message: `${file.fileName} is not valid JSON; a settings file looks like sample-data/panel-settings.json.` },
    ]);
  }
  const { config, problems } = validatePanelConfig(parsed, file.fileName);
  if (config === null) {
    throw new AppError(
      'UPLOAD_BAD_OPTION',
      { option: 'settings', detail: `${file.fileName} has ${problems.length} problem(s).` },
      problems.map((problem) => ({ file: problem.file, column: problem.path || null, message: problem.message })),
    );
  }
  return config;
}

/**
 * Runs the import after every earlier one (one writer at a time). When it changed sessions, the
 * panel's fits are brought up to date in the background; a failure to schedule that is logged
 * and never spoils the import's answer (the monitor pages queue a refit themselves when stale).
 */
export async function runImport(
  app: FastifyInstance,
  request: { panel: string; file: ReceivedFile; source: 'http' | 'web'; options: ImportOptions; settings?: PanelConfigFile },
): Promise<ImportReport> {
  const { panel, file, source, options, settings } = request;
  const report = await app.importQueue.run(() =>
    importRatings(app.db, {
      panel,
      fileName: file.fileName,
      source,
      input: { path: file.path },
      scale: options.scale,
      quarantine: options.quarantine,
      sheet: options.sheet,
      settings,
    }),
  );
  const refits = app.refitService;
  if (report.ok && report.changedSessions.length > 0) {
    try {
      refits.schedule(report.panel, `import ${report.importId ?? ''}`.trim());
    } catch (error) {
      app.log.warn({ err: error, panel: report.panel }, 'could not schedule a refit after the import');
    }
  }
  return report;
}

/** HTTP status of an import answer: 200 when something (or nothing new) was stored, 422 when rejected. */
export function importStatus(report: ImportReport): number {
  return report.outcome === 'rejected' ? 422 : 200;
}

/**
 * The API's JSON answer: the store's ImportReport; a rejection also carries the common error
 * fields (`status`, `code`, `error`) next to its `errors` list.
 */
export function importAnswerBody(report: ImportReport): object {
  if (report.outcome !== 'rejected') return report;
  return { ...report, ok: false, status: 422, code: 'IMPORT_REJECTED', error: report.message };
}
