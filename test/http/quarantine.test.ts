/**
 * Quarantined cells are released with a corrected value (or discarded) from the import's page
 * and from the API; the released value joins the session, nothing else changes.
 */
import { describe, expect, it } from 'vitest';
import { csrfFrom, freshApps, longCsv, postCsv, SMALL_SESSION_ROWS } from './http-helpers.js';

const fresh = freshApps();

/** Imports the small session with the A01/P1/replicate 2 value (row 3) out of scale, quarantined. */
async function withQuarantinedCell() {
  const t = await fresh();
  const rows = SMALL_SESSION_ROWS.map((row) => [...row]);
  rows[1][6] = 40; // a decimal shift of 4.0
  const report = (await postCsv(t.app, 'oat', longCsv(rows), 'scaleMin=0&scaleMax=10&quarantine=true')).json();
  expect(report.outcome).toBe('quarantined');
  const page = (await t.app.inject({ url: `/imports/${report.importId}.json` })).json();
  const cell = page.quarantine[0];
  expect(cell).toMatchObject({ rowNumber: 3, status: 'held', rawValue: '40' });
  return { ...t, importId: report.importId as number, cellId: cell.quarantineId as number };
}

describe('quarantine', () => {
  it('releases a cell with its corrected value through the API', async () => {
    const { app, cellId } = await withQuarantinedCell();
    const before = (await app.inject({ url: '/panels/oat/sessions/W01.json' })).json();
    expect(before.attributes[0].rows[0].values).toEqual([3, null, 7, 8]);
    const released = await app.inject({ method: 'POST', url: `/api/quarantine/${cellId}/release`, payload: { value: 4 } });
    expect(released.statusCode, released.body).toBe(200);
    expect(released.json()).toMatchObject({ ok: true, cell: { status: 'released', resolvedValue: 4 } });
    const after = (await app.inject({ url: '/panels/oat/sessions/W01.json' })).json();
    expect(after.attributes[0].rows[0].values).toEqual([3, 4, 7, 8]);
    expect(after.dataVersion).toBe(before.dataVersion + 1);
    // a second release is refused with the store's reason
    const again = await app.inject({ method: 'POST', url: `/api/quarantine/${cellId}/release`, payload: { value: 4 } });
    expect(again.statusCode).toBe(409);
    expect(again.json()).toMatchObject({ ok: false, code: 'QUARANTINE_REFUSED' });
    expect(again.json().error).toContain('already released');
  });

  it('refuses a value outside the scale or not a number, and an unknown cell', async () => {
    const { app, cellId } = await withQuarantinedCell();
    const outside = await app.inject({ method: 'POST', url: `/api/quarantine/${cellId}/release`, payload: { value: 40 } });
    expect(outside.statusCode).toBe(409);
    expect(outside.json().error).toContain('outside the scale');
    const text = await app.inject({ method: 'POST', url: `/api/quarantine/${cellId}/release`, payload: { value: 'four' } });
    expect(text.statusCode).toBe(400);
    const missing = await app.inject({ method: 'POST', url: '/api/quarantine/999/release', payload: { value: 4 } });
    expect(missing.statusCode).toBe(404);
    expect(missing.json().code).toBe('QUARANTINE_NOT_FOUND');
  });

  it('releases and discards from the import page with its CSRF-protected forms', async () => {
    const { app, importId, cellId } = await withQuarantinedCell();
    const page = await app.inject({ url: `/imports/${importId}` });
    expect(page.body).toContain(`action="/quarantine/${cellId}/release"`);
    const { token, cookie } = csrfFrom(page);
    const forged = await app.inject({ method: 'POST', url: `/quarantine/${cellId}/discard`, headers: { cookie }, payload: { _csrf: 'nope' } });
    expect(forged.statusCode).toBe(403);
    const released = await app.inject({ method: 'POST', url: `/quarantine/${cellId}/release`, headers: { cookie }, payload: { _csrf: token, value: '4,0' } });
    expect(released.statusCode).toBe(303);
    expect(released.headers.location).toBe(`/imports/${importId}#quarantine`);
    const view = (await app.inject({ url: `/imports/${importId}.json` })).json();
    expect(view.quarantine[0]).toMatchObject({ status: 'released' });
    // no held cells left: the page has no forms any more
    expect((await app.inject({ url: `/imports/${importId}` })).body).not.toContain('/quarantine/');
  });

  it('discards a cell: it stays listed, never analysed', async () => {
    const { app, importId, cellId } = await withQuarantinedCell();
    const discarded = await app.inject({ method: 'POST', url: `/api/quarantine/${cellId}/discard` });
    expect(discarded.json()).toMatchObject({ ok: true, cell: { status: 'discarded' } });
    const session = (await app.inject({ url: '/panels/oat/sessions/W01.json' })).json();
    expect(session.counts.nRatings).toBe(6);
    expect((await app.inject({ url: `/imports/${importId}.json` })).json().quarantine[0].status).toBe('discarded');
  });
});
