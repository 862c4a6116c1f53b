/**
 * Data-quality flags computed from stored ratings, per session (methods §5; analysis/quality/):
 * swapped-codes (watch only), straight-lining, missing-cells, in-range decimal-shift, and
 * scale-end clipping. The flag kinds of the contract have no clipping kind, so clipping is
 * reported as `scale-expansion` with the test named in the evidence (see the helper report).
 * Watch-only straight-lining is reported for the recent window only, so an assessor who
 * compresses their scale is not listed once per session for a whole year (that pattern is the
 * scale-compression flag's job).
 */
import type { Flag } from '../../domain/flags.js';
import type { Rating } from '../../domain/ratings.js';
import {
  assessorResidualSpreads,
  checkClipping,
  checkInRangeDecimalShift,
  checkMissingCells,
  checkStraightLining,
  detectSwappedCodes,
  sessionData,
  SWAP_HISTORY_SESSIONS,
  type ResidualSpread,
} from '../quality/index.js';
import { resultKey, type FlagContext } from './context.js';
import { points } from './format.js';

/**
 * Per-session results kept between flag builds by the caller (the refit's flags phase keeps one
 * per worker thread): the checks of an old session do not change when new sessions arrive. Keyed
 * by everything they depend on, including a fingerprint of the session's ratings. Bounded; results
 * are identical with or without a memo.
 */
export interface QualityFlagsMemo {
  sessions: Map<string, Flag[]>;
  /** Text → slot (even index into textLanes) of its two lane hashes; slot 0 is kept for "no code". */
  textSlots: Map<string, number>;
  /** Lane pairs of the distinct texts seen (names, codes): textLanes[i], textLanes[i + 1]. */
  textLanes: Uint32Array;
}

export function createQualityFlagsMemo(): QualityFlagsMemo {
  return { sessions: new Map(), textSlots: new Map(), textLanes: new Uint32Array(1024) };
}

const SESSION_MEMO_LIMIT = 20_000;
/** Distinct texts remembered; beyond this the table starts again at the next call. */
const TEXT_SLOT_LIMIT = 100_000;

export function qualityFlags(ctx: FlagContext, memo?: QualityFlagsMemo): Flag[] {
  const ratings = ctx.history.ratings ?? [];
  if (ratings.length === 0) return [];
  const q = ctx.settings.quality;
  const bySession = new Map<string, Rating[]>();
  for (const r of ratings) {
    const list = bySession.get(r.session);
    if (list) list.push(r);
    else bySession.set(r.session, [r]);
  }
  const recent = new Set(ctx.recentWindow);
  const importedMissing = new Set(ctx.history.importFindings.filter((f) => f.code === 'missing-cells').map((f) => `${f.session ?? ''}\u0000${f.assessor ?? ''}`));
  const out: Flag[] = [];
  const sessions = [...bySession.keys()].sort((a, b) => (ctx.sessionOrder.get(a) ?? 0) - (ctx.sessionOrder.get(b) ?? 0));
  // The swap check also reads charts.sessionsPerYear (its yearly false-alert budget).
  const qualityKey = JSON.stringify([q, ctx.settings.charts.sessionsPerYear]);
  // Cleared between calls only, so every text slot used below belongs to one text for the whole call.
  if (memo && memo.textSlots.size >= TEXT_SLOT_LIMIT) memo.textSlots.clear();
  // Each assessor's residual spreads in the sessions so far (oldest first), pooled by the swap check.
  const spreadHistory = new Map<string, ResidualSpread[]>();
  for (const session of sessions) {
    const sessionRatings = bySession.get(session) as Rating[];
    const priorSpreads = new Map([...spreadHistory].map(([assessor, list]) => [assessor, list.slice(-SWAP_HISTORY_SESSIONS)]));
    for (const [assessor, spread] of assessorResidualSpreads(sessionData(session, sessionRatings, ctx.history.attributes), q.swapMinAttributes)) {
      const list = spreadHistory.get(assessor);
      if (list) list.push(spread);
      else spreadHistory.set(assessor, [spread]);
    }
    const productTestP = new Map(ctx.history.attributes.map((a) => [a.name, ctx.results.get(resultKey(session, a.name))?.productTestP ?? null]));
    if (!memo) {
      sessionFlags(ctx, session, sessionRatings, productTestP, priorSpreads, recent, importedMissing, out);
      continue;
    }
    const key = [
      session,
      recent.has(session),
      qualityKey,
      JSON.stringify([...productTestP]),
      JSON.stringify(ctx.history.attributes),
      importedMissing.size > 0 ? JSON.stringify([...importedMissing].filter((k) => k.startsWith(`${session}\u0000`))) : '',
      fingerprint(memo, sessionRatings),
      // The swap check pools earlier sessions' spreads: a changed history changes the result.
      JSON.stringify([...priorSpreads]),
    ].join('\u0001');
    const cached = memo.sessions.get(key);
    if (cached) {
      out.push(...structuredClone(cached));
      continue;
    }
    const before = out.length;
    sessionFlags(ctx, session, sessionRatings, productTestP, priorSpreads, recent, importedMissing, out);
    if (memo.sessions.size >= SESSION_MEMO_LIMIT) memo.sessions.delete(memo.sessions.keys().next().value as string);
    memo.sessions.set(key, structuredClone(out.slice(before)));
  }
  return out;
}

/**
 * Order-sensitive 64-bit fingerprint (two 32-bit FNV-1a-style lanes) of the ratings' identifying
 * fields and values. Each text field enters as its own hash, kept in the memo (one pass over its
 * characters per distinct text, not per rating), the replicate as an integer and the value by its
 * 64 IEEE bits, so a year of ratings is fingerprinted in about a millisecond instead of ~20
 * (String() of every value was most of the old cost). Only a memo key: results do not depend on it.
 */
function fingerprint(memo: QualityFlagsMemo, ratings: readonly Rating[]): string {
  let h1 = 0x811c9dc5;
  let h2 = 0x01000193;
  let lastAssessor: string | undefined;
  let lastProduct: string | undefined;
  let lastAttribute: string | undefined;
  let assessorHash = 0;
  let productHash = 0;
  let attributeHash = 0;
  const valueBits = new Float64Array(1);
  const valueWords = new Uint32Array(valueBits.buffer);
  for (const r of ratings) {
    if (r.assessor !== lastAssessor) {
      lastAssessor = r.assessor;
      assessorHash = textHash(memo, r.assessor);
    }
    if (r.product !== lastProduct) {
      lastProduct = r.product;
      productHash = textHash(memo, r.product);
    }
    if (r.attribute !== lastAttribute) {
      lastAttribute = r.attribute;
      attributeHash = textHash(memo, r.attribute);
    }
    valueBits[0] = r.value;
    const codeHash = r.code === null || r.code === undefined ? NO_CODE_SLOT : textHash(memo, r.code);
    // Read after textHash calls, which may grow the table.
    const lanes = memo.textLanes;
    // Each text hash is a slot of a (lane 1, lane 2) pair; mixing both lanes keeps 64 bits of state.
    h1 = Math.imul(h1 ^ lanes[assessorHash], 16777619);
    h2 = Math.imul(h2 ^ lanes[assessorHash + 1], 2246822519);
    h1 = Math.imul(h1 ^ lanes[productHash], 16777619);
    h2 = Math.imul(h2 ^ lanes[productHash + 1], 2246822519);
    h1 = Math.imul(h1 ^ lanes[attributeHash], 16777619);
    h2 = Math.imul(h2 ^ lanes[attributeHash + 1], 2246822519);
    h1 = Math.imul(h1 ^ lanes[codeHash], 16777619);
    h2 = Math.imul(h2 ^ lanes[codeHash + 1], 2246822519);
    h1 = Math.imul(h1 ^ r.replicate, 16777619);
    h2 = Math.imul(h2 ^ r.replicate, 2246822519);
    h1 = Math.imul(h1 ^ valueWords[0], 16777619);
    h2 = Math.imul(h2 ^ valueWords[1], 2246822519);
    h1 = Math.imul(h1 ^ valueWords[1], 16777619);
    h2 = Math.imul(h2 ^ valueWords[0], 2246822519);
  }
  return `${ratings.length}:${(h1 >>> 0).toString(36)}:${(h2 >>> 0).toString(36)}`;
}

/** Lanes 0, 0 (never a text's: texts start at slot 2), so "no code" differs from an empty code. */
const NO_CODE_SLOT = 0;

/** Slot (even index into memo.textLanes) of a text's two lane hashes, computed once per distinct text. */
function textHash(memo: QualityFlagsMemo, text: string): number {
  let slot = memo.textSlots.get(text);
  if (slot !== undefined) return slot;
  slot = 2 * (memo.textSlots.size + 1);
  if (slot + 2 > memo.textLanes.length) {
    const grown = new Uint32Array(memo.textLanes.length * 2);
    grown.set(memo.textLanes);
    memo.textLanes = grown;
  }
  let a = 0x811c9dc5 ^ text.length;
  let b = 0x01000193 ^ text.length;
  for (let i = 0; i < text.length; i++) {
    a = Math.imul(a ^ text.charCodeAt(i), 16777619);
    b = Math.imul(b ^ text.charCodeAt(i), 2246822519);
  }
  memo.textLanes[slot] = a >>> 0;
  memo.textLanes[slot + 1] = b >>> 0;
  memo.textSlots.set(text, slot);
  return slot;
}

function sessionFlags(
  ctx: FlagContext,
  session: string,
  sessionRatings: Rating[],
  productTestP: Map<string, number | null>,
  priorSpreads: ReadonlyMap<string, readonly ResidualSpread[]>,
  recent: Set<string>,
  importedMissing: Set<string>,
  out: Flag[],
): void {
  const q = ctx.settings.quality;
  const data = sessionData(session, sessionRatings, ctx.history.attributes);
  const base = { product: null, attribute: null, firstSession: session };

  const swapOptions = { minRelativeGain: q.swapMinRelativeGain, minAttributes: q.swapMinAttributes, falseAlertsPerYear: q.swapFalseAlertsPerYear, sessionsPerYear: ctx.settings.charts.sessionsPerYear };
  for (const swap of detectSwappedCodes(data, productTestP, swapOptions, priorSpreads)) {
    const codes = swap.codes[0] && swap.codes[1] ? ` (codes ${swap.codes[0]} and ${swap.codes[1]})` : '';
    out.push({
      ...base,
      kind: 'swapped-codes',
      assessor: swap.assessor,
      // One product code per field (filters by product must work); both are in evidence.products and the message.
      product: swap.productA,
      severity: 'watch',
      evidence: {
        test: 'served-versus-swapped test on the pair, against the assessor’s own residual spread (methods §5.10)',
        statistic: swap.relativeGain,
        pValue: swap.pValue,
        qValue: null,
        n: swap.nAttributes,
        threshold: `one-sided p < ${formatAlpha(swap.alphaPerTest)} (${q.swapFalseAlertsPerYear} false alerts per year shared over sessions, assessors and product pairs, more to pairs where a swap would show), the swapped order not rejected, the panel separating the pair, and relative gain ρ ≥ ${q.swapMinRelativeGain}`,
        lastSession: session,
        replicate: swap.replicate,
        products: [swap.productA, swap.productB],
        codes: swap.codes,
        tServed: swap.tServed,
        tSwapped: swap.tSwapped,
        df: swap.df,
        alphaPerTest: swap.alphaPerTest,
        separationSd: swap.separationSd,
        panelSeparationT: swap.panelSeparationT,
      },
      message: `In session ${session}, ${swap.assessor}'s ratings of ${swap.productA} and ${swap.productB}${codes}, ${swap.replicate === null ? 'averaged over the replicates' : `replicate ${swap.replicate}`}, each matched the other product's panel profile better than their own, by more than this assessor's own rating noise explains (the panel's two profiles are ${points(swap.separationSd, 1)} of the assessor's own SDs apart), so the two samples may have been entered under each other's code.`,
    });
  }

  const straight = checkStraightLining(data, productTestP, { watchRatio: q.straightLiningWatchRatio, actShare: q.straightLiningActShare });
  for (const summary of straight.summaries) {
    const own = straight.findings.filter((f) => f.assessor === summary.assessor);
    if (own.length === 0) continue;
    const flat = own.filter((f) => f.severity === 'act');
    if (flat.length === 0 && !recent.has(session)) continue;
    const listed = flat.length > 0 ? flat : own;
    out.push({
      ...base,
      kind: 'straight-lining',
      assessor: summary.assessor,
      attribute: listed.length === 1 ? listed[0].attribute : null,
      severity: flat.length > 0 ? 'act' : 'watch',
      evidence: {
        test: 'spread of the assessor cell means over products (methods §5.6)',
        statistic: listed.length === 1 ? listed[0].spreadSd : null,
        pValue: null,
        qValue: null,
        n: summary.nAttributes,
        threshold: flat.length > 0 ? 'no variation over products while the panel product test p < 0.05' : `SD over products below ${q.straightLiningWatchRatio} × the panel median`,
        lastSession: session,
        sessionLevelAct: summary.sessionAct,
        attributes: listed.map((f) => ({ attribute: f.attribute, spreadSd: f.spreadSd, panelMedianSpreadSd: f.panelMedianSpreadSd, range: f.range })),
      },
      message:
        flat.length > 0
          ? `In session ${session}, ${summary.assessor} gave every product the same rating on ${flat.length === 1 ? flat[0].attribute : `${flat.length} of ${summary.nAttributes} attributes`} although the panel separated the products.`
          : `In session ${session}, ${summary.assessor}'s ratings varied much less between products than the rest of the panel's on ${listed.length === 1 ? listed[0].attribute : `${listed.length} attributes`}.`,
    });
  }

  for (const missing of checkMissingCells(data, { watchCompleteness: q.missingWatchCompleteness, actCompleteness: q.missingActCompleteness })) {
    if (importedMissing.has(`${session}\u0000${missing.assessor}`)) continue;
    out.push({
      ...base,
      kind: 'missing-cells',
      assessor: missing.assessor,
      severity: missing.severity,
      evidence: {
        test: 'completeness of the assessor in the session (methods §5.5)',
        statistic: missing.completeness,
        pValue: null,
        qValue: null,
        n: missing.nPlanned,
        threshold: missing.severity === 'act' ? `completeness < ${q.missingActCompleteness}` : `completeness < ${q.missingWatchCompleteness}`,
        lastSession: session,
        nRated: missing.nRated,
      },
      message: `In session ${session}, ${missing.assessor} rated ${missing.nRated} of the ${missing.nPlanned} planned product, attribute and replicate cells (${Math.round(missing.completeness * 100)}%).`,
    });
  }

  const shifts = checkInRangeDecimalShift(data, { minRange: q.decimalShiftMinRange, robustZ: q.decimalShiftRobustZ });
  const byAssessor = new Map<string, typeof shifts>();
  for (const s of shifts) byAssessor.set(s.assessor, [...(byAssessor.get(s.assessor) ?? []), s]);
  for (const [assessor, list] of byAssessor) {
    const first = list[0];
    out.push({
      ...base,
      kind: 'decimal-shift',
      assessor,
      product: list.every((s) => s.product === first.product) ? first.product : null,
      attribute: list.every((s) => s.attribute === first.attribute) ? first.attribute : null,
      severity: 'watch',
      evidence: {
        test: 'in-range decimal shift against the other assessors’ median (methods §5.3b)',
        statistic: first.value,
        pValue: null,
        qValue: null,
        n: list.length,
        threshold: `|value − median| > ${q.decimalShiftRobustZ} × 1.4826 MAD and value × 10 or ÷ 10 within one robust SD of the median`,
        lastSession: session,
        values: list.map((s) => ({ product: s.product, attribute: s.attribute, replicate: s.replicate, value: s.value, suggestedValue: s.suggestedValue, panelMedian: s.panelMedian })),
      },
      message: `In session ${session}, ${assessor} rated ${first.product} on ${first.attribute} at ${points(first.value)} where the other assessors' median was ${points(first.panelMedian)}, which would match if the decimal point were moved (${points(first.suggestedValue)})${list.length > 1 ? `, and ${list.length - 1} more such value${list.length > 2 ? 's' : ''}` : ''}.`,
    });
  }

  for (const clip of checkClipping(data, { zoneFraction: q.clippingZoneFraction, watchFraction: q.clippingWatchFraction, watchMultiple: q.clippingWatchMultiple, actFraction: q.clippingActFraction })) {
    out.push({
      ...base,
      kind: 'scale-expansion',
      assessor: clip.assessor,
      severity: clip.severity,
      evidence: {
        test: 'scale-end clipping: share of ratings in the end zones (methods §5.7)',
        statistic: clip.endShare,
        pValue: null,
        qValue: null,
        n: clip.nRatings,
        threshold: clip.severity === 'act' ? `share ≥ ${q.clippingActFraction}` : `share ≥ ${q.clippingWatchFraction} and ≥ ${q.clippingWatchMultiple} × panel median (${points(clip.panelMedianEndShare, 2)})`,
        lastSession: session,
        panelMedianEndShare: clip.panelMedianEndShare,
      },
      message: `In session ${session}, ${Math.round(clip.endShare * 100)}% of ${clip.assessor}'s ratings were at the very ends of the scale, against ${Math.round(clip.panelMedianEndShare * 100)}% for the median assessor.`,
    });
  }
}

/** A small per-test level in plain digits (e.g. 3.4e-6 → "0.0000034"). */
function formatAlpha(alpha: number): string {
  return alpha >= 0.001 ? String(Number(alpha.toPrecision(2))) : alpha.toFixed(Math.max(0, -Math.floor(Math.log10(alpha)) + 1));
}
