/**
 * Token mode: weak tokens refused at start-up (the attack run used 16 × the same letter), wrong
 * tokens braked per client (it made 300 guesses a second), and sign-in cookies that expire.
 */
import { randomBytes } from 'node:crypto';
import fc from 'fast-check';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { buildApp } from '../../server/app.js';
import { startServer } from '../../server/cli/serve-command.js';
import {
  estimateTokenBits,
  FailedAttemptBrake,
  FREE_FAILED_ATTEMPTS,
  isValidSessionCookie,
  SESSION_MAX_AGE_SECONDS,
  sessionCookieValue,
  weakTokenReason,
} from '../../server/plugins/token-guard.js';
import { openStore } from '../../store/open-store.js';
import { csrfFrom, freshApps } from './http-helpers.js';

const TOKEN = 'a-test-token-of-enough-length-0123';
const LAN = { host: 'lab-pc:8080' };

afterEach(() => {
  vi.useRealTimers();
});

describe('weak tokens are refused at start-up, saying why', () => {
  it.each([
    ['aaaaaaaaaaaaaaaa', /only 1 different character/],
    ['abababababababab', /only 2 different characters/],
    ['abcdefghijklmnop', /too easy to guess/],
    ['1234567890123456', /too easy to guess/],
    ['Password123456789!', /too easy to guess/],
    ['short', /at least 16 characters/],
  ])('%s', (token, reason) => {
    expect(weakTokenReason(token)).toMatch(reason);
  });

  it('accepts random tokens (base64url of 24 bytes, hex of 16 bytes) and ordinary long ones', () => {
    fc.assert(
      fc.property(fc.uint8Array({ minLength: 24, maxLength: 24 }), (bytes) => {
        expect(weakTokenReason(Buffer.from(bytes).toString('base64url'))).toBeNull();
      }),
      { numRuns: 300 },
    );
    for (let i = 0; i < 300; i++) expect(weakTokenReason(randomBytes(16).toString('hex'))).toBeNull();
    expect(weakTokenReason(TOKEN)).toBeNull();
  });

  it('counts a repeated unit once, whatever the length (fast-check)', () => {
    fc.assert(
      fc.property(fc.string({ minLength: 1, maxLength: 4 }), fc.integer({ min: 4, max: 40 }), (unit, times) => {
        const token = unit.repeat(times);
        expect(estimateTokenBits(token)).toBeLessThanOrEqual(Array.from(unit).length * 2);
        expect(weakTokenReason(token)).not.toBeNull();
      }),
      { numRuns: 300 },
    );
  });

  it('in the app and in serve', async () => {
    const db = openStore(':memory:');
    await expect(buildApp({ db, config: { host: '0.0.0.0', accessToken: 'aaaaaaaaaaaaaaaa' } })).rejects.toThrow(/only 1 different character/);
    await expect(buildApp({ db, config: { host: '127.0.0.1', accessToken: 'abcdefghijklmnop' } })).rejects.toThrow(/too easy to guess/);
    db.close();
    const saved = process.env.PANEL_STEWARD_TOKEN;
    process.env.PANEL_STEWARD_TOKEN = 'aaaaaaaaaaaaaaaa';
    try {
      await expect(startServer({ host: '127.0.0.1', port: '0', db: ':memory:' }, { write: () => true })).rejects.toThrow(/PANEL_STEWARD_TOKEN is refused.*only 1 different character/);
    } finally {
      if (saved === undefined) delete process.env.PANEL_STEWARD_TOKEN;
      else process.env.PANEL_STEWARD_TOKEN = saved;
    }
  });
});

describe('the wrong-token brake', () => {
  it('lets a few wrong tokens through, then doubles the wait up to 5 minutes; a right token clears it', () => {
    let nowMs = 1_000_000;
    const brake = new FailedAttemptBrake(() => nowMs);
    for (let i = 0; i < FREE_FAILED_ATTEMPTS; i++) {
      expect(brake.retryAfterSeconds('10.0.0.7')).toBe(0);
      brake.failed('10.0.0.7');
    }
    expect(brake.retryAfterSeconds('10.0.0.7')).toBe(0);
    const waits: number[] = [];
    for (let i = 0; i < 12; i++) {
      brake.failed('10.0.0.7');
      const wait = brake.retryAfterSeconds('10.0.0.7');
      waits.push(wait);
      nowMs += wait * 1000;
    }
    expect(waits).toEqual([1, 2, 4, 8, 16, 32, 64, 128, 256, 300, 300, 300]);
    expect(brake.retryAfterSeconds('10.0.0.8')).toBe(0); // per client
    brake.succeeded('10.0.0.7');
    expect(brake.retryAfterSeconds('10.0.0.7')).toBe(0);
    // An hour without wrong tokens forgets the count.
    for (let i = 0; i <= FREE_FAILED_ATTEMPTS; i++) brake.failed('10.0.0.9');
    nowMs += 61 * 60_000;
    brake.failed('10.0.0.9');
    expect(brake.retryAfterSeconds('10.0.0.9')).toBe(0);
  });

  const fresh = freshApps();

  it('300 wrong bearer tokens in a row: only the first few are checked, the rest get 429 with Retry-After', async () => {
    const { app } = await fresh({ host: '0.0.0.0', accessToken: TOKEN });
    const statuses: number[] = [];
    let retryAfter: string | undefined;
    for (let i = 0; i < 300; i++) {
      const response = await app.inject({ url: '/api/panels', headers: { ...LAN, authorization: `Bearer guess-${i}-xxxxxxxxxxxxxxxx` } });
      statuses.push(response.statusCode);
      if (response.statusCode === 429) {
        retryAfter ??= response.headers['retry-after'] as string;
        expect(response.json()).toMatchObject({ ok: false, code: 'TOO_MANY_ATTEMPTS' });
      }
    }
    const checked = statuses.filter((s) => s === 401).length;
    expect(checked).toBeGreaterThanOrEqual(FREE_FAILED_ATTEMPTS + 1);
    expect(checked).toBeLessThanOrEqual(FREE_FAILED_ATTEMPTS + 4); // a 1-2 s wait may pass during the run
    expect(Number(retryAfter)).toBeGreaterThanOrEqual(1);
    // While braked, even the right token waits (so a guess cannot be confirmed).
    expect((await app.inject({ url: '/api/panels', headers: { ...LAN, authorization: `Bearer ${TOKEN}` } })).statusCode).toBe(429);
  });

  it('after the wait the right token works again; the sign-in form is braked the same way', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    vi.setSystemTime(new Date('2026-03-02T09:00:00Z'));
    const { app } = await fresh({ host: '0.0.0.0', accessToken: TOKEN });
    const login = await app.inject({ url: '/login?next=/imports', headers: LAN });
    const { token: csrf, cookie } = csrfFrom(login);
    const post = (token: string) => app.inject({ method: 'POST', url: '/login', headers: { ...LAN, cookie }, payload: { _csrf: csrf, token, next: '/imports' } });
    for (let i = 0; i <= FREE_FAILED_ATTEMPTS; i++) expect((await post(`wrong-${i}`)).statusCode).toBe(401);
    const braked = await post(TOKEN);
    expect(braked.statusCode).toBe(429);
    expect(braked.headers['retry-after']).toBe('1');
    expect(braked.body).toContain('Too many wrong access tokens');
    vi.setSystemTime(new Date('2026-03-02T09:00:02Z'));
    const good = await post(TOKEN);
    expect(good.statusCode).toBe(303);
    expect(good.headers.location).toBe('/imports');
  });
});

describe('the sign-in cookie expires', () => {
  const fresh = freshApps();

  it('has Max-Age, is refused by the service after it, and a forged one is refused', async () => {
    vi.useFakeTimers({ toFake: ['Date'] });
    vi.setSystemTime(new Date('2026-03-02T09:00:00Z'));
    const { app } = await fresh({ host: '0.0.0.0', accessToken: TOKEN });
    const login = await app.inject({ url: '/login', headers: LAN });
    const { token: csrf, cookie } = csrfFrom(login);
    const good = await app.inject({ method: 'POST', url: '/login', headers: { ...LAN, cookie }, payload: { _csrf: csrf, token: TOKEN, next: '/' } });
    const session = good.cookies.find((c) => c.name === 'panel_steward_session');
    expect(session?.maxAge).toBe(SESSION_MAX_AGE_SECONDS);
    expect(String(good.headers['set-cookie'])).toContain(`Max-Age=${SESSION_MAX_AGE_SECONDS}`);
    const withCookie = (value: string) => app.inject({ url: '/imports.json', headers: { ...LAN, cookie: `panel_steward_session=${value}` } });
    expect((await withCookie(session!.value)).statusCode).toBe(200);
    vi.setSystemTime(new Date(Date.now() + (SESSION_MAX_AGE_SECONDS + 1) * 1000));
    const expired = await withCookie(session!.value);
    expect(expired.statusCode).toBe(401);
    expect(String(expired.headers['set-cookie'])).toMatch(/panel_steward_session=;/); // dropped
    const forged = `${Math.floor(Date.now() / 1000)}.${'0'.repeat(64)}`;
    expect((await withCookie(forged)).statusCode).toBe(401);
  });

  it('is bound to the token and to its issue time', () => {
    const now = Date.parse('2026-03-02T09:00:00Z');
    const value = sessionCookieValue(TOKEN, now);
    expect(value).not.toContain(TOKEN);
    expect(isValidSessionCookie(value, TOKEN, now + 1000)).toBe(true);
    expect(isValidSessionCookie(value, `${TOKEN}x`, now)).toBe(false);
    expect(isValidSessionCookie(value, TOKEN, now + (SESSION_MAX_AGE_SECONDS + 1) * 1000)).toBe(false);
    expect(isValidSessionCookie(value.replace(/^\d+/, String(Math.floor(now / 1000) + 5)), TOKEN, now)).toBe(false);
  });
});

describe('behind a TLS reverse proxy on the same computer (README)', () => {
  const fresh = freshApps();

  it('works with the headers the README tells the proxy to send (Host of the service, no Origin)', async () => {
    const { app } = await fresh({ host: '127.0.0.1', accessToken: TOKEN });
    // What the proxy forwards: Host rewritten to the service's own address, Origin dropped, the
    // browser's Sec-Fetch-Site passed through.
    const proxied = { host: '127.0.0.1:8080', 'sec-fetch-site': 'same-origin' };
    expect((await app.inject({ url: '/imports', headers: proxied })).statusCode).toBe(303); // to sign in
    const login = await app.inject({ url: '/login?next=/imports', headers: proxied });
    const { token: csrf, cookie } = csrfFrom(login);
    const good = await app.inject({ method: 'POST', url: '/login', headers: { ...proxied, cookie }, payload: { _csrf: csrf, token: TOKEN, next: '/imports' } });
    expect(good.statusCode).toBe(303);
    const session = good.cookies.find((c) => c.name === 'panel_steward_session');
    expect((await app.inject({ url: '/imports', headers: { ...proxied, cookie: `panel_steward_session=${session!.value}` } })).statusCode).toBe(200);
    // A page of another site still cannot post through the proxy.
    const crossSite = await app.inject({ method: 'POST', url: '/login', headers: { ...proxied, 'sec-fetch-site': 'cross-site', cookie }, payload: { _csrf: csrf, token: TOKEN } });
    expect(crossSite.statusCode).toBe(403);
  });
});

