/**
 * Guards of token mode: a token strong enough to be the only lock (checked at start-up),
 * a per-client brake on wrong tokens, and sign-in cookies that expire.
 */
import { createHmac, timingSafeEqual } from 'node:crypto';

export const MIN_TOKEN_CHARS = 16;
export const MIN_TOKEN_BITS = 64;

/**
 * A deliberately cautious estimate of a token's entropy in bits. Characters that repeat the one
 * before or step by one from it ("aaaa", "abcd", "1234") add nothing, a token made of a repeated
 * unit counts only the unit, and each remaining character counts log2 of the number of distinct
 * characters used (not of the alphabet it could have come from). A random 32-character base64url
 * token scores about 140 bits, a random 32-digit hex token about 100.
 */
export function estimateTokenBits(token: string): number {
  const chars = Array.from(token);
  let period = chars.length;
  // A unit that is repeated at least twice (the last repeat may be cut short).
  for (let p = 1; p <= chars.length / 2; p++) {
    let repeats = true;
    for (let i = p; i < chars.length && repeats; i++) repeats = chars[i] === chars[i - p];
    if (repeats) {
      period = p;
      break;
    }
  }
  const unit = chars.slice(0, period);
  let informative = 0;
  for (let i = 0; i < unit.length; i++) {
    const step = i === 0 ? Infinity : Math.abs(unit[i].codePointAt(0)! - unit[i - 1].codePointAt(0)!);
    if (step > 1) informative += 1;
  }
  const distinct = new Set(unit).size;
  return informative * Math.log2(Math.max(distinct, 2));
}

/** Why a token is too weak to protect the service, or null when it is fine. */
export function weakTokenReason(token: string): string | null {
  const advice = 'Use a random one, for example the output of `openssl rand -base64 24`, or leave PANEL_STEWARD_TOKEN unset to get a generated token.';
  const nChars = Array.from(token).length;
  if (nChars < MIN_TOKEN_CHARS) return `The access token is ${nChars} characters long; it needs at least ${MIN_TOKEN_CHARS} characters. ${advice}`;
  const distinct = new Set(Array.from(token)).size;
  if (distinct < 6) return `The access token uses only ${distinct} different character${distinct === 1 ? '' : 's'}, which is easy to guess. ${advice}`;
  const bits = estimateTokenBits(token);
  if (bits < MIN_TOKEN_BITS) {
    return `The access token is too easy to guess (about ${Math.floor(bits)} bits of randomness by a cautious estimate; at least ${MIN_TOKEN_BITS} are needed: repeats, runs such as "abcd" or "1234" and a small set of characters count little). ${advice}`;
  }
  return null;
}

// ---- wrong-token brake ----

/** Wrong tokens a client may send before it has to wait. */
export const FREE_FAILED_ATTEMPTS = 5;
const FIRST_WAIT_MS = 1_000;
const LONGEST_WAIT_MS = 5 * 60_000;
/** A client's count is forgotten after this long without a wrong token. */
const FORGET_AFTER_MS = 60 * 60_000;
/** Clients remembered at once (the oldest is forgotten first): memory stays bounded. */
const MAX_CLIENTS = 10_000;

interface ClientRecord {
  nFailed: number;
  lastFailedMs: number;
  blockedUntilMs: number;
}

/**
 * Counts wrong tokens per client address. After FREE_FAILED_ATTEMPTS, each further wrong token
 * closes the door for twice as long as the last (1 s, 2 s, 4 s … at most 5 minutes); while it is
 * closed, nothing that carries a token is even checked (so guessing cannot go on, and cannot learn
 * anything), and the answer is 429 with Retry-After. A right token clears the count.
 */
export class FailedAttemptBrake {
  private readonly clients = new Map<string, ClientRecord>();

  constructor(private readonly now: () => number = Date.now) {}

  /** Seconds the client must still wait, or 0. */
  retryAfterSeconds(client: string): number {
    const record = this.clients.get(client);
    if (record === undefined) return 0;
    const waitMs = record.blockedUntilMs - this.now();
    return waitMs > 0 ? Math.ceil(waitMs / 1000) : 0;
  }

  failed(client: string): void {
    const nowMs = this.now();
    let record = this.clients.get(client);
    if (record !== undefined && nowMs - record.lastFailedMs > FORGET_AFTER_MS) record = undefined;
    record ??= { nFailed: 0, lastFailedMs: nowMs, blockedUntilMs: 0 };
    record.nFailed += 1;
    record.lastFailedMs = nowMs;
    const over = record.nFailed - FREE_FAILED_ATTEMPTS;
    if (over > 0) record.blockedUntilMs = nowMs + Math.min(LONGEST_WAIT_MS, FIRST_WAIT_MS * 2 ** Math.min(over - 1, 30));
    this.clients.delete(client); // re-insert: the Map's order is then oldest failure first
    this.clients.set(client, record);
    if (this.clients.size > MAX_CLIENTS) this.clients.delete(this.clients.keys().next().value as string);
  }

  succeeded(client: string): void {
    this.clients.delete(client);
  }
}

// ---- sign-in cookie ----

/** A signed-in browser stays signed in for a working day. */
export const SESSION_MAX_AGE_SECONDS = 12 * 60 * 60;
/** Clocks of browser and service may differ a little. */
const CLOCK_SKEW_SECONDS = 60;

function cookieMac(accessToken: string, issuedAtSeconds: number): string {
  return createHmac('sha256', accessToken).update(`panel-steward-session\u0000${issuedAtSeconds}`).digest('hex');
}

/** The cookie value for a browser that signed in at `nowMs`: issue time and a MAC keyed by the token (never the token). */
export function sessionCookieValue(accessToken: string, nowMs: number = Date.now()): string {
  const issuedAtSeconds = Math.floor(nowMs / 1000);
  return `${issuedAtSeconds}.${cookieMac(accessToken, issuedAtSeconds)}`;
}

/** Whether a cookie value was made with this token and is younger than SESSION_MAX_AGE_SECONDS. */
export function isValidSessionCookie(value: string, accessToken: string, nowMs: number = Date.now()): boolean {
  const match = /^(\d{1,12})\.([0-9a-f]{64})$/.exec(value);
  if (match === null) return false;
  const issuedAtSeconds = Number(match[1]);
  const ageSeconds = nowMs / 1000 - issuedAtSeconds;
  if (ageSeconds > SESSION_MAX_AGE_SECONDS || ageSeconds < -CLOCK_SKEW_SECONDS) return false;
  return timingSafeEqual(Buffer.from(match[2], 'hex'), Buffer.from(cookieMac(accessToken, issuedAtSeconds), 'hex'));
}
