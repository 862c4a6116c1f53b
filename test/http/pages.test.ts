/**
 * Every page and its JSON twin through app.inject against a fresh store. Numbers are asserted on
 * the JSON twin (against hand counts of the small session in http-helpers.ts); the HTML is
 * checked for structure and for showing the same numbers.
 */
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { longCsv, makeTestApp, postCsv, SMALL_SESSION_ROWS, type TestApp } from './http-helpers.js';

let t: TestApp;
beforeEach(async () => {
  t = await makeTestApp();
});
afterEach(async () => {
  await t.close();
});

describe('home page', () => {
  it('says how to start when the store is empty', async () => {
    const html = await t.app.inject({ url: '/' });
    expect(html.statusCode).toBe(200);
    expect(html.headers['content-type']).toContain('text/html');
    expect(html.body).toContain('No panels yet');
    expect(html.body).toContain('href="/upload"');
    const json = await t.app.inject({ url: '/.json' });
    expect(json.json()).toMatchObject({ ok: true, nPanels: 0, panels: [] });
    expect((await t.app.inject({ url: '/index.json' })).json()).toEqual(json.json());
  });

  it('lists panels with their counts, the same in HTML and JSON', async () => {
    expect((await postCsv(t.app, 'oat drink', longCsv(SMALL_SESSION_ROWS))).statusCode).toBe(200);
    const json = (await t.app.inject({ url: '/.json' })).json();
    expect(json.panels).toHaveLength(1);
    expect(json.panels[0]).toMatchObject({
      name: 'oat drink',
      href: '/panels/oat%20drink',
      nSessions: 1,
      nAssessors: 2,
      nProducts: 2,
      nAttributes: 1,
      nRatings: 7,
      nImports: 1,
      nQuarantineHeld: 0,
      firstSessionDate: '2026-01-05',
      lastSessionDate: '2026-01-05',
    });
    const html = await t.app.inject({ url: '/' });
    // The panel's name leads to its weekly review (the landing page); the session count to the sessions.
    expect(html.body).toContain('<a href="/panels/oat%20drink/monitor/review">oat drink</a>');
    expect(html.body).toContain('<a href="/panels/oat%20drink" aria-label="1 session of oat drink">1</a>');
    expect(html.headers.link).toBe('</.json>; rel="alternate"; type="application/json"');
  });
});

describe('panel page', () => {
  it('gives each session its counts and completeness', async () => {
    await postCsv(t.app, 'oat', longCsv(SMALL_SESSION_ROWS));
    const json = (await t.app.inject({ url: '/panels/oat.json' })).json();
    expect(json.panel).toBe('oat');
    expect(json.attributes).toEqual([{ name: 'sweetness', scaleMin: 0, scaleMax: 10, anchorLow: null, anchorHigh: null }]);
    expect(json.sessions).toHaveLength(1);
    // 7 ratings of 2 assessors × 2 products × 2 replicates × 1 attribute = 8 cells → 87.5 %.
    expect(json.sessions[0]).toMatchObject({
      label: 'W01',
      date: '2026-01-05',
      nAssessors: 2,
      nProducts: 2,
      nReplicates: 2,
      nAttributes: 1,
      nRatings: 7,
      completenessPercent: 87.5,
      href: '/panels/oat/sessions/W01',
    });
    const html = await t.app.inject({ url: '/panels/oat' });
    expect(html.statusCode).toBe(200);
    expect(html.body).toContain('87.5 %');
    expect(html.body).toContain('<a href="/panels/oat/sessions/W01">W01</a>');
    // the panel's own navigation appears on its pages
    expect(html.body).toContain('class="panel-nav"');
  });

  it('answers 404 in HTML and JSON for an unknown panel', async () => {
    const html = await t.app.inject({ url: '/panels/nobody' });
    expect(html.statusCode).toBe(404);
    expect(html.headers['content-type']).toContain('text/html');
    expect(html.body).toContain('There is no panel named &quot;nobody&quot;.');
    const json = await t.app.inject({ url: '/panels/nobody.json' });
    expect(json.statusCode).toBe(404);
    expect(json.json()).toEqual({
      ok: false,
      status: 404,
      code: 'PANEL_NOT_FOUND',
      error: 'There is no panel named "nobody".',
      errors: [{ message: 'There is no panel named "nobody".' }],
    });
  });

  it('still shows a panel whose own name ends in .json', async () => {
    await postCsv(t.app, 'trial.json', longCsv(SMALL_SESSION_ROWS));
    const html = await t.app.inject({ url: '/panels/trial.json' });
    expect(html.statusCode).toBe(200);
    expect(html.headers['content-type']).toContain('text/html');
    const json = await t.app.inject({ url: '/panels/trial.json.json' });
    expect(json.json().panel).toBe('trial.json');
  });
});

describe('session page', () => {
  it('tabulates ratings per attribute with product means', async () => {
    await postCsv(t.app, 'oat', longCsv(SMALL_SESSION_ROWS));
    const json = (await t.app.inject({ url: '/panels/oat/sessions/W01.json' })).json();
    expect(json.counts).toEqual({ nAssessors: 2, nProducts: 2, nReplicates: 2, nAttributes: 1, nRatings: 7 });
    expect(json.completenessPercent).toBe(87.5);
    expect(json.attributes).toHaveLength(1);
    const table = json.attributes[0];
    expect(table.attribute).toBe('sweetness');
    expect(table.columns).toEqual([
      { product: 'P1', replicate: 1 },
      { product: 'P1', replicate: 2 },
      { product: 'P2', replicate: 1 },
      { product: 'P2', replicate: 2 },
    ]);
    expect(table.rows).toEqual([
      { assessor: 'A01', values: [3, 4, 7, 8] },
      { assessor: 'A02', values: [5, 6, 9, null] },
    ]);
    // hand means: P1 (3+4+5+6)/4 = 4.5; P2 (7+8+9)/3 = 8
    expect(table.productMeans).toEqual([
      { product: 'P1', mean: 4.5, nRatings: 4 },
      { product: 'P2', mean: 8, nRatings: 3 },
    ]);
    expect(table.valueDigits).toBe(0);
    const html = (await t.app.inject({ url: '/panels/oat/sessions/W01' })).body;
    expect(html).toContain('<td class="num">4.50</td>'); // P1 mean, two decimals
    expect(html).toMatch(/<th scope="row">A01<\/th><td class="num">3<\/td><td class="num">4<\/td>/); // whole-number ratings as written
    expect(html).toContain('<td class="num">—</td>'); // the missing cell
    expect(html).toContain('href="/panels/oat/sessions/W01.csv"');
  });

  it('downloads the session in long form that imports back unchanged', async () => {
    await postCsv(t.app, 'oat', longCsv(SMALL_SESSION_ROWS));
    const csv = await t.app.inject({ url: '/panels/oat/sessions/W01.csv' });
    expect(csv.statusCode).toBe(200);
    expect(csv.headers['content-type']).toContain('text/csv');
    expect(csv.headers['content-disposition']).toContain('attachment; filename="oat-W01.csv"');
    const lines = csv.body.trim().split('\r\n');
    expect(lines[0]).toBe('session,date,assessor,product,replicate,attribute,value,code');
    expect(lines).toHaveLength(8);
    // re-import into another panel, then its JSON twin has the same table
    const again = await postCsv(t.app, 'copy', csv.body);
    expect(again.json().counts.ratings).toBe(7);
    const original = (await t.app.inject({ url: '/panels/oat/sessions/W01.json' })).json();
    const copy = (await t.app.inject({ url: '/panels/copy/sessions/W01.json' })).json();
    expect(copy.attributes).toEqual(original.attributes);
  });

  it('answers 404 for an unknown session', async () => {
    await postCsv(t.app, 'oat', longCsv(SMALL_SESSION_ROWS));
    const json = await t.app.inject({ url: '/panels/oat/sessions/W99.json' });
    expect(json.statusCode).toBe(404);
    expect(json.json().code).toBe('SESSION_NOT_FOUND');
    expect((await t.app.inject({ url: '/panels/oat/sessions/W99.csv' })).statusCode).toBe(404);
  });
});

describe('imports pages', () => {
  it('lists imports newest first, for all panels or one', async () => {
    await postCsv(t.app, 'oat', longCsv(SMALL_SESSION_ROWS));
    await postCsv(t.app, 'rye', longCsv(SMALL_SESSION_ROWS));
    await postCsv(t.app, 'oat', longCsv(SMALL_SESSION_ROWS)); // identical again: unchanged
    const all = (await t.app.inject({ url: '/imports.json' })).json();
    expect(all.nImportsTotal).toBe(3);
    expect(all.imports.map((row: { panel: string; outcome: string }) => [row.panel, row.outcome])).toEqual([
      ['oat', 'unchanged'],
      ['rye', 'imported'],
      ['oat', 'imported'],
    ]);
    const oat = (await t.app.inject({ url: '/imports.json?panel=oat' })).json();
    expect(oat.panel).toBe('oat');
    expect(oat.imports).toHaveLength(2);
    const html = await t.app.inject({ url: '/imports?panel=oat' });
    expect(html.body).toContain('Imports of panel oat');
    expect(html.headers.link).toContain('/imports.json?panel=oat');
    expect((await t.app.inject({ url: '/imports.json?panel=nobody' })).statusCode).toBe(404);
  });

  it('shows one import with its counts, problems and quarantined cells', async () => {
    // row 3 (spreadsheet numbering, header = 1) has a value outside the 0–10 scale
    const rows = SMALL_SESSION_ROWS.map((row) => [...row]);
    rows[1][6] = 12;
    const answer = await postCsv(t.app, 'oat', longCsv(rows), 'scaleMin=0&scaleMax=10&quarantine=true');
    expect(answer.statusCode).toBe(200);
    const report = answer.json();
    expect(report.outcome).toBe('quarantined');
    const page = (await t.app.inject({ url: `/imports/${report.importId}.json` })).json();
    expect(page.import).toMatchObject({ importId: report.importId, panel: 'oat', fileName: 'test.csv', source: 'http', outcome: 'quarantined' });
    expect(page.import).not.toHaveProperty('reportJson');
    expect(page.panel).toBe('oat');
    expect(page.result.counts.find((c: { key: string }) => c.key === 'quarantined').value).toBe(report.counts.quarantined);
    expect(page.quarantine.length).toBe(report.counts.quarantined);
    expect(page.quarantine[0]).toMatchObject({ rowNumber: 3, column: 'value', assessor: 'A01', product: 'P1', attribute: 'sweetness', rawValue: '12', status: 'held' });
    const html = (await t.app.inject({ url: `/imports/${report.importId}` })).body;
    expect(html).toContain('Cells held in quarantine');
    expect(html).toContain(report.sha256);
  });

  it('answers 404 for an unknown or malformed import number', async () => {
    for (const url of ['/imports/999.json', '/imports/abc.json', '/imports/1e3.json', '/imports/-1.json']) {
      const response = await t.app.inject({ url });
      expect(response.statusCode, url).toBe(404);
      expect(response.json().code).toBe('IMPORT_NOT_FOUND');
    }
  });
});

describe('service basics', () => {
  it('answers the health check and serves the stylesheet', async () => {
    const health = await t.app.inject({ url: '/healthz' });
    expect(health.statusCode).toBe(200);
    expect(health.json()).toMatchObject({ ok: true, status: 'ok' });
    const css = await t.app.inject({ url: '/static/style.css' });
    expect(css.statusCode).toBe(200);
    expect(css.headers['content-type']).toContain('text/css');
    expect(css.body).toContain('@media print');
  });

  it('answers unknown paths with 404 in the format asked for', async () => {
    const html = await t.app.inject({ url: '/no/such/page' });
    expect(html.statusCode).toBe(404);
    expect(html.body).toContain('There is no page at /no/such/page.');
    const json = await t.app.inject({ url: '/api/nothing' });
    expect(json.statusCode).toBe(404);
    expect(json.json()).toMatchObject({ ok: false, status: 404, code: 'NOT_FOUND' });
  });
});
