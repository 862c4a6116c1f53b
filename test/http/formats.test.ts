/**
 * The sample files (long CSV, wide XLSX, panel settings JSON) through the API and through the
 * web form: both ways in give the same stored sessions, and the settings file sets scales,
 * anchor words and the reference product.
 */
import { readFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { csrfFrom, freshApps } from './http-helpers.js';

const SAMPLES = resolve(import.meta.dirname, '../../sample-data');
const LONG_CSV = readFileSync(join(SAMPLES, 'session-S01-long.csv'));
const WIDE_XLSX = readFileSync(join(SAMPLES, 'session-S02-wide.xlsx'));
const SETTINGS = readFileSync(join(SAMPLES, 'panel-settings.json'));
const XLSX_TYPE = 'application/vnd.openxmlformats-officedocument.spreadsheetml.sheet';

const fresh = freshApps();

function upload(fields: Record<string, string>, files: { field: string; name: string; bytes: Buffer; type: string }[]): FormData {
  const form = new FormData();
  for (const [name, value] of Object.entries(fields)) form.append(name, value);
  for (const file of files) form.append(file.field, new Blob([file.bytes], { type: file.type }), file.name);
  return form;
}

const firstWeek = [
  { field: 'file', name: 'session-S01-long.csv', bytes: LONG_CSV, type: 'text/csv' },
  { field: 'settings', name: 'panel-settings.json', bytes: SETTINGS, type: 'application/json' },
];
const secondWeek = [{ field: 'file', name: 'session-S02-wide.xlsx', bytes: WIDE_XLSX, type: XLSX_TYPE }];

describe('sample files over HTTP', () => {
  it('imports the long CSV with its settings file, then the wide XLSX', async () => {
    const { app } = await fresh();
    const first = await app.inject({ method: 'POST', url: '/api/panels/trial/imports', payload: upload({}, firstWeek) });
    expect(first.statusCode, first.body).toBe(200);
    expect(first.json().counts).toMatchObject({ ratings: 800, sessionsNew: 1 }); // 10 × 5 × 2 × 8
    const second = await app.inject({ method: 'POST', url: '/api/panels/trial/imports', payload: upload({}, secondWeek) });
    expect(second.statusCode, second.body).toBe(200);
    expect(second.json()).toMatchObject({ outcome: 'imported', fileName: 'session-S02-wide.xlsx', changedSessions: ['S02'] });

    const panel = (await app.inject({ url: '/panels/trial.json' })).json();
    expect(panel.sessions.map((s: { label: string }) => s.label)).toEqual(['S02', 'S01']);
    expect(panel.attributes.find((a: { name: string }) => a.name === 'sweetness')).toMatchObject({
      scaleMin: 0,
      scaleMax: 10,
      anchorLow: 'not sweet',
      anchorHigh: 'very sweet',
    });
    const session = (await app.inject({ url: '/panels/trial/sessions/S01.json' })).json();
    expect(session.products.find((p: { code: string }) => p.code === 'REF').role).toBe('reference');
  });

  it('the same as an .xlsx body with its name in the query', async () => {
    const { app } = await fresh();
    await app.inject({ method: 'POST', url: '/api/panels/trial/imports', payload: upload({}, firstWeek) });
    const response = await app.inject({
      method: 'POST',
      url: '/api/panels/trial/imports?fileName=week2.xlsx',
      headers: { 'content-type': XLSX_TYPE },
      payload: WIDE_XLSX,
    });
    expect(response.statusCode, response.body).toBe(200);
    expect(response.json()).toMatchObject({ outcome: 'imported', fileName: 'week2.xlsx' });
  });

  it('lists the problems of a bad settings file', async () => {
    const { app } = await fresh();
    const bad = Buffer.from(JSON.stringify({ scale: { min: 10, max: 0 }, colour: 'blue' }));
    const response = await app.inject({
      method: 'POST',
      url: '/api/panels/trial/imports',
      payload: upload({}, [firstWeek[0], { field: 'settings', name: 'mine.json', bytes: bad, type: 'application/json' }]),
    });
    expect(response.statusCode).toBe(400);
    const body = response.json();
    expect(body.code).toBe('UPLOAD_BAD_OPTION');
    expect(body.errors.length).toBeGreaterThan(0);
    expect(body.errors.every((e: { file: string }) => e.file === 'mine.json')).toBe(true);
    const notJson = await app.inject({
      method: 'POST',
      url: '/api/panels/trial/imports',
      payload: upload({}, [firstWeek[0], { field: 'settings', name: 'x.json', bytes: Buffer.from('{oops'), type: 'application/json' }]),
    });
    expect(notJson.statusCode).toBe(400);
    expect(notJson.json().errors[0].message).toContain('not valid JSON');
  });

  it('gives identical stored sessions through the API and through the web form', async () => {
    const viaApi = await fresh();
    for (const files of [firstWeek, secondWeek]) {
      const response = await viaApi.app.inject({ method: 'POST', url: '/api/panels/trial/imports', payload: upload({}, files) });
      expect(response.statusCode).toBe(200);
    }
    const viaWeb = await fresh();
    for (const files of [firstWeek, secondWeek]) {
      const { token, cookie } = csrfFrom(await viaWeb.app.inject({ url: '/upload' }));
      const response = await viaWeb.app.inject({
        method: 'POST',
        url: '/upload',
        headers: { cookie },
        payload: upload({ _csrf: token, panel: 'trial' }, files),
      });
      expect(response.statusCode, response.body.slice(0, 500)).toBe(200);
    }
    for (const url of ['/panels/trial/sessions/S01', '/panels/trial/sessions/S02']) {
      const api = (await viaApi.app.inject({ url: `${url}.json` })).json();
      const web = (await viaWeb.app.inject({ url: `${url}.json` })).json();
      expect(web).toEqual(api);
      const apiCsv = (await viaApi.app.inject({ url: `${url}.csv` })).body;
      expect((await viaWeb.app.inject({ url: `${url}.csv` })).body).toBe(apiCsv);
    }
    const sources = (await viaWeb.app.inject({ url: '/imports.json' })).json().imports.map((row: { source: string }) => row.source);
    expect(sources).toEqual(['web', 'web']);
  });
});
