/**
 * Releasing a quarantined cell with its corrected value, or discarding it: from the import's
 * page (forms, CSRF-protected, then back to the page) and from the API (JSON). Both are writes,
 * so they wait their turn in the import queue, and a release schedules a refit like an import.
 */
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { Type, type Static } from '@sinclair/typebox';
import { discardQuarantined, getQuarantined, QuarantineError, releaseQuarantined, type QuarantinedCell } from '../../store/quarantine.js';
import { importHref } from '../../report/page-common.js';
import { AppError } from '../errors.js';

const CellParams = Type.Object({ cellId: Type.String({ pattern: '^[0-9]{1,12}$' }) });
type CellParams = Static<typeof CellParams>;

/** A corrected value as people type it ("7", "7.5", "7,5") or as a JSON number. */
function parseCorrectedValue(raw: unknown): number {
  const text = typeof raw === 'number' ? String(raw) : typeof raw === 'string' ? raw.trim().replace(',', '.') : '';
  const value = /^[+-]?(\d+(\.\d*)?|\.\d+)$/.test(text) ? Number(text) : NaN;
  if (!Number.isFinite(value)) {
    throw new AppError('UPLOAD_BAD_OPTION', { option: 'value', detail: 'give the corrected rating as a number, for example 6.5.' }, [
      { column: 'value', message: 'Give the corrected rating as a number, for example 6.5.' },
    ]);
  }
  return value;
}

function requireCell(app: FastifyInstance, cellIdText: string): QuarantinedCell {
  const cell = getQuarantined(app.db, Number(cellIdText));
  if (!cell) throw new AppError('QUARANTINE_NOT_FOUND', { cellId: cellIdText });
  return cell;
}

/** Runs a quarantine change in the writer queue; the store's refusal becomes a 409 with its reason. */
async function change<T>(app: FastifyInstance, work: () => T): Promise<T> {
  try {
    return await app.importQueue.run(async () => work());
  } catch (error) {
    if (error instanceof QuarantineError) throw new AppError('QUARANTINE_REFUSED', { detail: error.message });
    throw error;
  }
}

function scheduleRefit(app: FastifyInstance, panel: string, reason: string): void {
  const refits = app.refitService;
  try {
    refits.schedule(panel, reason);
  } catch (error) {
    app.log.warn({ err: error, panel }, 'could not schedule a refit after a quarantine release');
  }
}

export async function quarantineRoutes(app: FastifyInstance): Promise<void> {
  const { db } = app;

  const release = async (cellId: string, rawValue: unknown) => {
    requireCell(app, cellId);
    const value = parseCorrectedValue(rawValue);
    const result = await change(app, () => releaseQuarantined(db, Number(cellId), value));
    scheduleRefit(app, result.cell.panel, `quarantine release ${cellId}`);
    return result;
  };
  const discard = async (cellId: string) => {
    requireCell(app, cellId);
    return change(app, () => discardQuarantined(db, Number(cellId)));
  };

  app.post<{ Params: CellParams; Body: { value?: unknown } }>(
    '/api/quarantine/:cellId/release',
    { schema: { params: CellParams } },
    async (request) => {
      const result = await release(request.params.cellId, (request.body ?? {}).value);
      return { ok: true, cell: result.cell, ratingId: result.ratingId, sessionCreated: result.sessionCreated };
    },
  );
  app.post<{ Params: CellParams }>('/api/quarantine/:cellId/discard', { schema: { params: CellParams } }, async (request) => ({
    ok: true,
    cell: await discard(request.params.cellId),
  }));

  // The import page's forms: back to that page afterwards.
  const backToImport = (reply: FastifyReply, cell: QuarantinedCell) => reply.redirect(`${importHref(cell.importId)}#quarantine`, 303);
  app.post<{ Params: CellParams }>(
    '/quarantine/:cellId/release',
    { schema: { params: CellParams }, preHandler: app.csrfProtection },
    async (request: FastifyRequest<{ Params: CellParams }>, reply) => {
      const result = await release(request.params.cellId, (request.body as Record<string, unknown> | undefined)?.value);
      return backToImport(reply, result.cell);
    },
  );
  app.post<{ Params: CellParams }>(
    '/quarantine/:cellId/discard',
    { schema: { params: CellParams }, preHandler: app.csrfProtection },
    async (request: FastifyRequest<{ Params: CellParams }>, reply) => backToImport(reply, await discard(request.params.cellId)),
  );
}
