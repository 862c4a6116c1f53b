/**
 * POST /api/panels/:panel/imports and GET /api/panels: multipart and text/csv uploads, the
 * answer is the store's ImportReport, bad input gets a 4xx with the error list, oversized
 * uploads a 413 with a clear message.
 */
import { describe, expect, it } from 'vitest';
import { formData, freshApps, longCsv, postCsv, SMALL_SESSION_ROWS } from './http-helpers.js';

const fresh = freshApps();

describe('import API', () => {
  it('imports a text/csv body and answers with the import report', async () => {
    const { app } = await fresh();
    const response = await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS));
    expect(response.statusCode).toBe(200);
    const report = response.json();
    expect(report).toMatchObject({
      ok: true,
      outcome: 'imported',
      panel: 'oat',
      fileName: 'test.csv',
      changedSessions: ['W01'],
      errors: [],
      totalErrors: 0,
    });
    expect(report.counts).toMatchObject({ rows: 7, ratings: 7, sessions: 1, sessionsNew: 1, quarantined: 0 });
    expect(report.sha256).toMatch(/^[0-9a-f]{64}$/);
    expect(typeof report.importId).toBe('number');
  });

  it('imports a multipart upload with its options as form fields', async () => {
    const { app } = await fresh();
    const response = await app.inject({
      method: 'POST',
      url: '/api/panels/oat/imports',
      payload: formData({ scaleMin: '0', scaleMax: '10', quarantine: 'false' }, { name: 'week-01.csv', content: longCsv(SMALL_SESSION_ROWS) }),
    });
    expect(response.statusCode).toBe(200);
    expect(response.json()).toMatchObject({ outcome: 'imported', fileName: 'week-01.csv', counts: { ratings: 7 } });
    const list = (await app.inject({ url: '/api/panels/oat/imports' })).json();
    expect(list.imports).toHaveLength(1);
    expect(list.imports[0]).toMatchObject({ source: 'http', fileName: 'week-01.csv', nRatings: 7 });
  });

  it('says unchanged for the identical file again, and lists panels', async () => {
    const { app } = await fresh();
    await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS));
    const again = await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS));
    expect(again.statusCode).toBe(200);
    expect(again.json()).toMatchObject({ outcome: 'unchanged' });
    const panels = (await app.inject({ url: '/api/panels' })).json();
    expect(panels).toMatchObject({ ok: true, nPanels: 1 });
    expect(panels.panels[0]).toMatchObject({ name: 'oat', nRatings: 7, nImports: 2 });
  });

  it('asks for the panel fits to be brought up to date after an import that changed sessions', async () => {
    const { app } = await fresh();
    await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS));
    const first = (await app.inject({ url: '/api/panels/oat/refit' })).json();
    expect(first.job).toMatchObject({ reason: 'import 1' });
    await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS)); // unchanged: no new refit
    const second = (await app.inject({ url: '/api/panels/oat/refit' })).json();
    expect(second.job.id).toBe(first.job.id);
  });

  it('rejects a bad file with 422 and the problems by row and column, writing nothing', async () => {
    const { app } = await fresh();
    const rows = SMALL_SESSION_ROWS.map((row) => [...row]);
    rows[4][4] = 0; // replicate 0 on spreadsheet row 6
    rows[5][6] = 'abc'; // not a number on row 7
    const response = await postCsv(app, 'oat', longCsv(rows));
    expect(response.statusCode).toBe(422);
    const body = response.json();
    expect(body).toMatchObject({ ok: false, status: 422, code: 'IMPORT_REJECTED', outcome: 'rejected', totalErrors: 2 });
    expect(body.error).toBe(body.message);
    expect(body.errors.map((e: { row: number; column: string; file: string }) => [e.file, e.row, e.column])).toEqual([
      ['test.csv', 6, 'replicate'],
      ['test.csv', 7, 'value'],
    ]);
    const panels = (await app.inject({ url: '/api/panels' })).json();
    expect(panels.panels.every((panel: { nRatings: number }) => panel.nRatings === 0)).toBe(true);
  });

  it('asks for the scale of a new panel', async () => {
    const { app } = await fresh();
    const response = await postCsv(app, 'new', longCsv(SMALL_SESSION_ROWS), '');
    expect(response.statusCode).toBe(422);
    expect(response.json().errors[0].code).toBe('scale-missing');
  });

  it('lists every bad option with 400', async () => {
    const { app } = await fresh();
    const response = await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS), 'scaleMin=ten&scaleMax=10&quarantine=maybe');
    expect(response.statusCode).toBe(400);
    const body = response.json();
    expect(body).toMatchObject({ ok: false, status: 400, code: 'UPLOAD_BAD_OPTION' });
    expect(body.errors.map((e: { column: string }) => e.column)).toEqual(['quarantine', 'scaleMin']);
    const reversed = await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS), 'scaleMin=10&scaleMax=0');
    expect(reversed.json().errors[0].message).toContain('smaller to a larger');
    const half = await postCsv(app, 'oat', longCsv(SMALL_SESSION_ROWS), 'scaleMin=1');
    expect(half.json().errors[0].message).toContain('both ends');
  });

  it('answers 400 when no file was sent', async () => {
    const { app } = await fresh();
    const response = await app.inject({ method: 'POST', url: '/api/panels/oat/imports', payload: formData({ scaleMin: '0', scaleMax: '10' }) });
    expect(response.statusCode).toBe(400);
    expect(response.json()).toMatchObject({ code: 'UPLOAD_MISSING_FILE' });
    const noBody = await app.inject({ method: 'POST', url: '/api/panels/oat/imports' });
    expect(noBody.statusCode).toBe(400);
    expect(noBody.json().code).toBe('UPLOAD_MISSING_FILE');
  });

  it('answers 415 for a JSON body', async () => {
    const { app } = await fresh();
    const response = await app.inject({ method: 'POST', url: '/api/panels/oat/imports', payload: { rows: [] } });
    expect(response.statusCode).toBe(415);
    expect(response.json().code).toBe('UNSUPPORTED_MEDIA_TYPE');
  });

  it('refuses uploads above the size limit with 413 and a clear message', async () => {
    const { app } = await fresh({ uploadLimitBytes: 1000 });
    const big = longCsv(Array.from({ length: 100 }, (_, i) => ['W01', '2026-01-05', `A${i}`, 'P1', 1, 'sweetness', 5]));
    expect(big.length).toBeGreaterThan(1000);
    const asCsv = await postCsv(app, 'oat', big);
    expect(asCsv.statusCode).toBe(413);
    expect(asCsv.json()).toMatchObject({ ok: false, status: 413, code: 'UPLOAD_TOO_LARGE' });
    expect(asCsv.json().error).toContain('1000 bytes');
    const asForm = await app.inject({
      method: 'POST',
      url: '/api/panels/oat/imports',
      payload: formData({ scaleMin: '0', scaleMax: '10' }, { name: 'big.csv', content: big }),
    });
    expect(asForm.statusCode).toBe(413);
    expect(asForm.json().code).toBe('UPLOAD_TOO_LARGE');
    // nothing was stored
    expect((await app.inject({ url: '/api/panels' })).json().nPanels).toBe(0);
  });

  it('refuses a declared length far above the limit before reading the body', async () => {
    const { app } = await fresh({ uploadLimitBytes: 1000 });
    const response = await app.inject({
      method: 'POST',
      url: '/api/panels/oat/imports',
      headers: { 'content-type': 'text/csv', 'content-length': String(10 * 1024 * 1024) },
      payload: 'session\n',
    });
    expect(response.statusCode).toBe(413);
  });

  it('refuses a panel name that is too long', async () => {
    const { app } = await fresh();
    const response = await postCsv(app, 'x'.repeat(201), longCsv(SMALL_SESSION_ROWS));
    expect(response.statusCode).toBe(400);
    expect(response.json().ok).toBe(false);
  });
});
