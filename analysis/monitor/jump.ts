/**
 * Sudden shifts: a one-session jump of an assessor's level on most attributes at once
 * (docs/methods.md §3.10). The EWMA and CUSUM charts are tuned to slow drifts and, by
 * design, average a jump over several sessions; a Shewhart-type individuals rule reacts to one
 * large value in the session it happens (Montgomery, Introduction to Statistical Quality Control,
 * on combining Shewhart and EWMA/CUSUM charts; Lucas & Saccucci 1990, combined Shewhart–EWMA).
 *
 * Per attribute, in its current baseline segment: jump = value − mean of the previous (up to four,
 * at least two) charted values, in units of the segment's spread σ̂ (max of the own moving-range
 * σ̂ and the panel-pooled one, as the drift charts use). A session is a jump when at least
 * `minAttributes` (a majority) of the evaluable attributes jump by at least `thresholdSd` in the
 * same direction. The threshold starts at `minJumpSd` (2 SDs by default, the panel setting
 * charts.jumpMinSd) on more than `attributeShare` (half, charts.jumpAttributeShare) of the
 * attributes, and the threshold is raised until the chance of that count under
 * independent normal attributes, 2·P(Binomial(n, p) ≥ m) with p = 1 − Φ(c/√(1 + 1/4)), is within
 * the false-alarm budget of one chart among `nCharts` charted each session.
 */
import { normalCdf } from '../distributions/index.js';
import { standardiseSegments, type SegmentOptions, type SeriesPoint } from './chart.js';
import { memoised, type ChartSizingMemo } from './sizing-memo.js';

/** Default smallest jump the rule looks for, in the assessor's SDs (the size the panel leader asked to see). */
export const MIN_JUMP_SD = 2;
/** Default share of the evaluable attributes a jump must exceed (a majority). */
export const JUMP_ATTRIBUTE_SHARE = 0.5;
/** Values before the session that the jump is measured from. */
const PREVIOUS_VALUES = 4;
const MIN_PREVIOUS_VALUES = 2;

export interface JumpInput {
  attribute: string;
  points: readonly SeriesPoint[];
  /** Panel-pooled spread of comparable series (a floor for σ̂), or null. */
  spreadFloorSd: number | null;
}

export interface JumpSizing {
  /** Charts of this kind evaluated each session (the assessors). */
  nCharts: number;
  sessionsPerYear: number;
  falseAlarmsPerYear: number;
  /** Smallest jump, in the assessor's SDs (default MIN_JUMP_SD). */
  minJumpSd?: number;
  /** A jump must show on more than this share of the evaluable attributes (default JUMP_ATTRIBUTE_SHARE). */
  attributeShare?: number;
}

export interface JumpRuleOptions {
  minJumpSd: number;
  attributeShare: number;
}

export interface JumpRule {
  thresholdSd: number;
  minAttributes: number;
  /** Chance of a false jump per chart and session under the rule's model. */
  chancePerSession: number;
}

export interface JumpAttribute {
  attribute: string;
  /** Scale points. */
  jumpPoints: number;
  /** In units of the attribute's spread σ̂. */
  jumpSd: number;
  spreadSd: number;
}

export interface Jump {
  session: string;
  direction: 'up' | 'down';
  /** The attributes that jumped in the direction, with their sizes. */
  attributes: JumpAttribute[];
  /** Attributes evaluable in that session. */
  nAttributes: number;
  medianJumpPoints: number;
  medianJumpSd: number;
  thresholdSd: number;
  minAttributes: number;
  chancePerSession: number;
  nCharts: number;
  falseAlarmsPerYear: number;
  /** Some jumped attribute's baseline is provisional. */
  provisional: boolean;
  /** Earlier jump sessions of the same series (the latest one is reported). */
  earlierSessions: string[];
}

function binomialUpperTail(n: number, m: number, p: number): number {
  let total = 0;
  let coefficient = 1;
  for (let k = 0; k <= n; k++) {
    if (k > 0) coefficient = (coefficient * (n - k + 1)) / k;
    if (k >= m) total += coefficient * p ** k * (1 - p) ** (n - k);
  }
  return total;
}

/** The rule for n evaluable attributes and a per-session false-alarm chance; kept in the caller's memo when given. */
export function jumpRule(
  nAttributes: number,
  chanceBudget: number,
  options: JumpRuleOptions = { minJumpSd: MIN_JUMP_SD, attributeShare: JUMP_ATTRIBUTE_SHARE },
  memo?: ChartSizingMemo,
): JumpRule {
  const key = `${nAttributes}|${chanceBudget}|${options.minJumpSd}|${options.attributeShare}`;
  return memoised(memo?.jumpRules, key, () => sizeJumpRule(nAttributes, chanceBudget, options));
}

function sizeJumpRule(nAttributes: number, chanceBudget: number, options: JumpRuleOptions): JumpRule {
  // "More than the share": with 0.5, a majority (floor(n/2) + 1); never more than all of them.
  const minAttributes = Math.min(nAttributes, Math.floor(nAttributes * options.attributeShare) + 1);
  let thresholdSd = options.minJumpSd;
  let chance = 1;
  for (; thresholdSd < Math.max(10, options.minJumpSd); thresholdSd += 0.05) {
    const p = 1 - normalCdf(thresholdSd / Math.sqrt(1 + 1 / PREVIOUS_VALUES));
    chance = 2 * binomialUpperTail(nAttributes, minAttributes, p);
    if (chance <= chanceBudget) break;
  }
  return { thresholdSd: Math.round(thresholdSd * 100) / 100, minAttributes, chancePerSession: chance };
}

function middle(values: readonly number[]): number {
  const sorted = [...values].sort((a, b) => a - b);
  const m = sorted.length >> 1;
  return sorted.length % 2 === 1 ? sorted[m] : (sorted[m - 1] + sorted[m]) / 2;
}

/** The latest jump in the series' current segments, or null. */
export function detectJump(series: readonly JumpInput[], options: SegmentOptions, sizing: JumpSizing, memo?: ChartSizingMemo): Jump | null {
  const budget = sizing.falseAlarmsPerYear / (Math.max(1, sizing.nCharts) * sizing.sessionsPerYear);
  const ruleOptions = { minJumpSd: sizing.minJumpSd ?? MIN_JUMP_SD, attributeShare: sizing.attributeShare ?? JUMP_ATTRIBUTE_SHARE };
  // Per attribute: session → jump measured in its current segment.
  const bySession = new Map<string, (JumpAttribute & { provisional: boolean })[]>();
  const order: string[] = [];
  for (const input of series) {
    const segments = standardiseSegments(input.points, options);
    const segment = segments[segments.length - 1];
    if (!segment || segment.points.length === 0 || segment.baseline.spreadSd === null) continue;
    const spreadSd = Math.max(segment.baseline.spreadSd, input.spreadFloorSd ?? 0);
    const provisional = segment.baseline.status === 'provisional';
    const values = segment.points;
    for (let t = MIN_PREVIOUS_VALUES; t < values.length; t++) {
      const previous = values.slice(Math.max(0, t - PREVIOUS_VALUES), t);
      const jumpPoints = values[t].value - previous.reduce((a, p) => a + p.value, 0) / previous.length;
      let list = bySession.get(values[t].session);
      if (!list) bySession.set(values[t].session, (list = []));
      list.push({ attribute: input.attribute, jumpPoints, jumpSd: jumpPoints / spreadSd, spreadSd, provisional });
    }
  }
  for (const point of series[0]?.points ?? []) if (bySession.has(point.session)) order.push(point.session);
  const found: Jump[] = [];
  // A step leaves its first session's jump in the previous-values window of the next few
  // sessions, so same-direction jumps within PREVIOUS_VALUES sessions of a jump are that jump.
  const lastAt = { up: -Infinity, down: -Infinity };
  for (const [position, session] of order.entries()) {
    const list = bySession.get(session) as (JumpAttribute & { provisional: boolean })[];
    const rule = jumpRule(list.length, budget, ruleOptions, memo);
    for (const direction of ['up', 'down'] as const) {
      const sign = direction === 'up' ? 1 : -1;
      const jumped = list.filter((a) => sign * a.jumpSd >= rule.thresholdSd);
      if (jumped.length < rule.minAttributes) continue;
      const previousJump = lastAt[direction];
      lastAt[direction] = position;
      if (position - previousJump <= PREVIOUS_VALUES) continue;
      found.push({
        session,
        direction,
        attributes: jumped.map(({ attribute, jumpPoints, jumpSd, spreadSd }) => ({ attribute, jumpPoints, jumpSd, spreadSd })),
        nAttributes: list.length,
        medianJumpPoints: middle(jumped.map((a) => a.jumpPoints)),
        medianJumpSd: middle(jumped.map((a) => a.jumpSd)),
        thresholdSd: rule.thresholdSd,
        minAttributes: rule.minAttributes,
        chancePerSession: rule.chancePerSession,
        nCharts: sizing.nCharts,
        falseAlarmsPerYear: sizing.falseAlarmsPerYear,
        provisional: jumped.some((a) => a.provisional),
        earlierSessions: [],
      });
    }
  }
  if (found.length === 0) return null;
  const latest = found[found.length - 1];
  return { ...latest, earlierSessions: found.slice(0, -1).map((j) => j.session) };
}
