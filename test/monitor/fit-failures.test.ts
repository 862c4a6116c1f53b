/**
 * Fits that cannot be made, in the service: a data condition (every assessor gave identical
 * ratings to both replicates of each product on one attribute) is stored as a sentence, shown as
 * "Could not be fitted: …" on the product page and not logged; an unexpected error inside a fit
 * (a planted fault) is logged at error level with its stack and shown the same way. Neither stops
 * the other attributes of the session.
 */
import { afterAll, beforeAll, describe, expect, it, vi } from 'vitest';
import type { Observation } from '../../domain/ratings.js';
import { createFitPool } from '../../server/fit-pool.js';
import { refitPanel } from '../../server/refit.js';
import { findPanel } from '../../store/fits-sessions.js';
import { loadSessionFits, loadSessionQuality } from '../../store/fits-results.js';
import { makeTestApp, type TestApp } from '../http/http-helpers.js';
import { countingRunner, importRatings, smallPanel } from './helpers.js';

/** The session and attribute whose fit throws an unexpected error (set per test). */
const planted = vi.hoisted(() => ({ session: '', attribute: '' }));
vi.mock('../../analysis/lmm/fit-session-model.js', async (importOriginal) => {
  const original = await importOriginal<typeof import('../../analysis/lmm/fit-session-model.js')>();
  return {
    ...original,
    fitSessionModel: (observations: Observation[]) => {
      if (observations[0].session === planted.session && observations[0].attribute === planted.attribute) throw new RangeError('a planted fault');
      return original.fitSessionModel(observations);
    },
  };
});

const panel = smallPanel({ nWeeks: 4 });
const name = panel.panelName;
const [flatAttribute, faultyAttribute, otherAttribute] = panel.attributes.map((a) => a.name);
const flatSession = panel.sessions[1].label;
const faultySession = panel.sessions[2].label;
// Every assessor repeats the first replicate's rating of each product on one attribute.
const firstReplicate = new Map<string, number>();
for (const r of panel.ratings) if (r.session === flatSession && r.attribute === flatAttribute && r.replicate === 1) firstReplicate.set(`${r.assessor}\u0000${r.product}`, r.value);
const ratings = panel.ratings.map((r) =>
  r.session === flatSession && r.attribute === flatAttribute ? { ...r, value: firstReplicate.get(`${r.assessor}\u0000${r.product}`) ?? r.value } : r,
);

let t: TestApp;
const logged: { details: Record<string, unknown>; message: string }[] = [];
beforeAll(async () => {
  planted.session = faultySession;
  planted.attribute = faultyAttribute;
  t = await makeTestApp();
  await importRatings(t.db, panel, ratings);
  const runner = countingRunner(createFitPool({ mode: 'in-thread' }), { skipPeriodFits: true });
  await refitPanel(t.db, name, { runner, logger: { error: (details, message) => logged.push({ details, message }) } });
  await runner.close();
}, 120_000);
afterAll(async () => t.close());

describe('fits that cannot be made', () => {
  it('the demo design has replicates (else the flat attribute would not be a zero-residual case)', () => {
    expect(firstReplicate.size).toBeGreaterThan(0);
    expect(ratings.some((r) => r.session === flatSession && r.replicate === 2)).toBe(true);
  });

  it('stores each as a sentence and fits the other attributes of the session', () => {
    const panelId = findPanel(t.db, name)!.id;
    const findings = new Map(loadSessionQuality(t.db, panelId).map((q) => [q.session, q.findings]));
    expect(findings.get(flatSession)).toEqual([
      { code: 'no-residual-variation', session: flatSession, attribute: flatAttribute, message: 'Could not be fitted: no replicate variation: every assessor gave identical ratings to each product.' },
    ]);
    expect(findings.get(faultySession)).toEqual([
      { code: 'fit-failed', session: faultySession, attribute: faultyAttribute, message: expect.stringMatching(/^Could not be fitted: the model failed unexpectedly/) },
    ]);
    const fitted = loadSessionFits(t.db, panelId).filter((f) => f.session === flatSession || f.session === faultySession);
    expect(fitted.map((f) => `${f.session}/${f.attribute}`).sort()).toEqual(
      [`${flatSession}/${faultyAttribute}`, `${flatSession}/${otherAttribute}`, `${faultySession}/${flatAttribute}`, `${faultySession}/${otherAttribute}`].sort(),
    );
  });

  it('logs the unexpected error with its stack at error level, and only that one', () => {
    expect(logged).toHaveLength(1);
    expect(logged[0].message).toBe('session fit failed: a planted fault');
    expect(logged[0].details).toMatchObject({ panel: name, session: faultySession, attribute: faultyAttribute });
    expect(logged[0].details.stack).toMatch(/RangeError: a planted fault\n\s+at /);
  });

  it('the product page names the sessions that could not be fitted, with the reason', async () => {
    for (const [attribute, session, reason] of [
      [flatAttribute, flatSession, 'Could not be fitted: no replicate variation: every assessor gave identical ratings to each product.'],
      [faultyAttribute, faultySession, 'Could not be fitted: the model failed unexpectedly'],
    ]) {
      const url = `/panels/${encodeURIComponent(name)}/monitor/products?attribute=${encodeURIComponent(attribute)}`;
      const html = await t.app.inject({ url });
      expect(html.statusCode).toBe(200);
      expect(html.body).toContain(`${session}: ${reason}`);
      const json = (await t.app.inject({ url: url.replace('/products?', '/products.json?') })).json();
      expect(json.notFitted).toEqual([{ session, reason: expect.stringContaining(reason) }]);
    }
  });
});
