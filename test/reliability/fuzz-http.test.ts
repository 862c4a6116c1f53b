/**
 * Bad input against every JSON endpoint, bounded for CI: random paths,
 * methods, query strings, headers, bodies and multipart forms. Whatever arrives, the service
 * never answers 5xx, every error is the one JSON shape with a message, and the store changes
 * only when an import says it stored something.
 */
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { longCsv, makeTestApp, SMALL_SESSION_ROWS, type TestApp } from '../http/http-helpers.js';

/** Runs per property; the seed is printed by fast-check on failure so a case can be replayed. */
const N_RUNS = Number(process.env.FUZZ_RUNS ?? 150);

let t: TestApp;
let nInputsTried = 0;
beforeAll(async () => {
  t = await makeTestApp();
  // one panel with data, so paths that name it reach real pages
  const seeded = await t.app.inject({
    method: 'POST',
    url: '/api/panels/oat/imports?scaleMin=0&scaleMax=10',
    headers: { 'content-type': 'text/csv' },
    payload: longCsv(SMALL_SESSION_ROWS),
  });
  expect(seeded.statusCode).toBe(200);
});
afterAll(async () => {
  console.log(`fuzz-http: ${nInputsTried} requests tried, none answered 5xx`);
  await t.close();
});

function ratingCount(): number {
  return (t.db.prepare('SELECT COUNT(*) AS n FROM rating').get() as { n: number }).n;
}

interface Answer {
  statusCode: number;
  headers: Record<string, unknown>;
  body: string;
}

/** The invariants every answer to a JSON endpoint keeps. */
function checkJsonAnswer(response: Answer, what: string): void {
  nInputsTried += 1;
  expect(response.statusCode, what).toBeLessThan(500);
  if (response.statusCode >= 400) {
    expect(String(response.headers['content-type']), what).toContain('application/json');
    const body = JSON.parse(response.body) as { ok: unknown; error: unknown; errors: unknown; status: unknown };
    expect(body.ok, what).toBe(false);
    expect(typeof body.error, what).toBe('string');
    expect((body.error as string).length, what).toBeGreaterThan(0);
    expect(Array.isArray(body.errors), what).toBe(true);
    expect(body.status, what).toBe(response.statusCode);
    expect(response.body, what).not.toMatch(/node_modules|\/work\/|at [\w.<>]+ \(/);
  }
}

const junkSegment = fc.oneof(
  fc.constantFrom('api', 'panels', 'oat', 'imports', 'sessions', 'W01', 'upload', 'healthz', '.json', '..', '.', '%00', '%E0%A4%A', '%2e%2e', '%2F', '%', '~', '1', '-1', '99999999999999999999'),
  fc.string({ maxLength: 30 }).map(encodeURIComponent),
  fc.string({ unit: 'binary', maxLength: 12 }).map(encodeURIComponent),
);
const jsonPath = fc
  .tuple(fc.array(junkSegment, { minLength: 0, maxLength: 5 }), fc.constantFrom('.json', '.csv', ''), fc.constantFrom('', '/api'))
  .map(([segments, suffix, prefix]) => `${prefix}/${segments.join('/')}${suffix}`)
  .filter((path) => path.startsWith('/api') || path.endsWith('.json') || path.endsWith('.csv'));
const queryString = fc
  .array(fc.tuple(fc.constantFrom('panel', 'fileName', 'quarantine', 'scaleMin', 'scaleMax', 'sheet', 'next', '_csrf', 'x'), fc.string({ maxLength: 40 })), { maxLength: 5 })
  .map((pairs) => (pairs.length === 0 ? '' : `?${pairs.map(([k, v]) => `${k}=${encodeURIComponent(v)}`).join('&')}`));
const method = fc.constantFrom<'GET' | 'POST' | 'PUT' | 'DELETE' | 'PATCH' | 'HEAD' | 'OPTIONS'>('GET', 'POST', 'PUT', 'DELETE', 'PATCH', 'HEAD', 'OPTIONS');
const headerValue = fc.string({ maxLength: 60 }).map((text) => text.replace(/[^\x20-\x7e]/g, ''));
const headers = fc.record(
  {
    accept: fc.constantFrom('application/json', 'text/html', '*/*', 'text/csv'),
    authorization: fc.oneof(headerValue, headerValue.map((v) => `Bearer ${v}`)),
    cookie: headerValue,
    origin: fc.constantFrom('http://localhost', 'null', 'http://evil.example', 'garbage'),
    'content-type': fc.oneof(
      fc.constantFrom('text/csv', 'application/json', 'multipart/form-data', 'multipart/form-data; boundary=x', 'application/octet-stream', 'text/plain; charset=utf-16', 'application/x-www-form-urlencoded'),
      headerValue,
    ),
  },
  { requiredKeys: [] },
);
const body = fc.oneof(
  fc.constant(''),
  fc.string({ maxLength: 400 }),
  fc.uint8Array({ maxLength: 2000 }).map((bytes) => Buffer.from(bytes)),
  fc.array(fc.array(fc.oneof(fc.string({ maxLength: 8 }), fc.double(), fc.integer()), { maxLength: 9 }), { maxLength: 20 }).map(
    (rows) => `session,date,assessor,product,replicate,attribute,value\n${rows.map((row) => row.join(',')).join('\n')}`,
  ),
);

describe('fuzzing the JSON endpoints', () => {
  it('answers any path, method, query and headers without a 5xx', async () => {
    await fc.assert(
      fc.asyncProperty(jsonPath, queryString, method, headers, body, async (path, query, verb, hdrs, payload) => {
        const before = ratingCount();
        const hasBody = verb !== 'GET' && verb !== 'HEAD' && verb !== 'OPTIONS';
        const response = await t.app.inject({ method: verb, url: path + query, headers: hdrs, payload: hasBody ? payload : undefined });
        // The client resolves dot segments first (/api/%2e%2e is sent as /), so what counts as a
        // JSON endpoint is decided on the path the service receives.
        const receivedPath = new URL(`http://localhost${path}`).pathname;
        const isJsonEndpoint = receivedPath.startsWith('/api') || receivedPath.endsWith('.json') || receivedPath.endsWith('.csv');
        if (verb === 'HEAD' || !isJsonEndpoint) {
          nInputsTried += 1;
          expect(response.statusCode, `${verb} ${path}`).toBeLessThan(500);
        } else checkJsonAnswer(response, `${verb} ${path}${query}`);
        if (!(response.statusCode === 200 && verb === 'POST')) expect(ratingCount()).toBe(before);
      }),
      { numRuns: N_RUNS },
    );
  });

  it('never fails on a random import body or options, and writes only what it reports', async () => {
    const options = fc.record(
      {
        fileName: fc.oneof(fc.string({ maxLength: 40 }), fc.constantFrom('a.xlsx', 'b.csv', '../../etc/passwd', 'C:\\x\\y.csv')),
        quarantine: fc.oneof(fc.constantFrom('true', 'false', 'on', ''), fc.string({ maxLength: 6 })),
        scaleMin: fc.oneof(fc.constantFrom('0', '1e999', 'NaN', '-Infinity', '10'), fc.string({ maxLength: 6 })),
        scaleMax: fc.oneof(fc.constantFrom('10', '1e999', 'NaN', '5', '0'), fc.string({ maxLength: 6 })),
        sheet: fc.string({ maxLength: 20 }),
      },
      { requiredKeys: [] },
    );
    const panel = fc.oneof(fc.constantFrom('oat', 'fuzz'), fc.string({ minLength: 1, maxLength: 40 }));
    const contentType = fc.constantFrom('text/csv', 'application/octet-stream', 'text/plain', 'application/vnd.openxmlformats-officedocument.spreadsheetml.sheet');
    await fc.assert(
      fc.asyncProperty(panel, options, contentType, body, async (panelName, opts, type, payload) => {
        const before = ratingCount();
        const query = new URLSearchParams(opts as Record<string, string>).toString();
        const response = await t.app.inject({
          method: 'POST',
          url: `/api/panels/${encodeURIComponent(panelName)}/imports?${query}`,
          headers: { 'content-type': type },
          payload,
        });
        checkJsonAnswer(response, `import into ${JSON.stringify(panelName)} ${query}`);
        const answer = JSON.parse(response.body) as { outcome?: string; counts?: { ratings: number } };
        if (answer.outcome !== 'imported' && answer.outcome !== 'quarantined') expect(ratingCount()).toBe(before);
      }),
      { numRuns: N_RUNS },
    );
  });

  it('never fails on random multipart forms', async () => {
    const field = fc.tuple(fc.constantFrom('file', 'panel', 'quarantine', 'scaleMin', 'scaleMax', 'sheet', '_csrf', 'extra', '__proto__', 'constructor'), fc.string({ maxLength: 30 }));
    await fc.assert(
      fc.asyncProperty(fc.array(field, { maxLength: 6 }), fc.option(body, { nil: undefined }), fc.string({ maxLength: 30 }), async (fields, file, fileName) => {
        const form = new FormData();
        for (const [name, value] of fields) form.append(name, value);
        if (file !== undefined) form.append('file', new Blob([file]), fileName || 'f.csv');
        const response = await t.app.inject({ method: 'POST', url: '/api/panels/fuzz-form/imports', payload: form });
        checkJsonAnswer(response, `multipart ${JSON.stringify(fields)}`);
      }),
      { numRuns: N_RUNS },
    );
  });

  it('never fails on truncated or garbled multipart bodies', async () => {
    const valid = '--b\r\nContent-Disposition: form-data; name="file"; filename="a.csv"\r\nContent-Type: text/csv\r\n\r\n' + longCsv(SMALL_SESSION_ROWS) + '\r\n--b--\r\n';
    await fc.assert(
      fc.asyncProperty(fc.nat({ max: valid.length }), fc.string({ maxLength: 20 }), async (cut, junk) => {
        const response = await t.app.inject({
          method: 'POST',
          url: '/api/panels/fuzz-cut/imports?scaleMin=0&scaleMax=10',
          headers: { 'content-type': 'multipart/form-data; boundary=b' },
          payload: valid.slice(0, cut) + junk,
        });
        checkJsonAnswer(response, `multipart cut at ${cut}`);
      }),
      { numRuns: N_RUNS },
    );
  });
});
