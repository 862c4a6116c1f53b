/**
 * Individuals (Shewhart) chart on standardised values with the Western Electric rules
 * (Western Electric 1956; methods notes §3.3), limits ±3:
 *   1. one point beyond ±3;
 *   2. two of three consecutive points beyond 2 on the same side;
 *   3. four of five consecutive points beyond 1 on the same side;
 *   4. eight consecutive points on the same side of the centre line.
 * A rule needing w points is evaluated from the w-th value on; z = 0 exactly breaks a same-side
 * run (methods §3.3, common practice). In-control ARL of rules 1–4 together ≈ 91.75
 * (Champ & Woodall 1987 [REC]); rule 1 alone 1/(2Φ(−3)) = 370.4.
 */

export type WesternElectricRule = 1 | 2 | 3 | 4;

/** Streaming state: the last eight standardised values, newest last. */
export interface RuleState {
  recent: number[];
}

export function createRuleState(): RuleState {
  return { recent: [] };
}

/** Adds one value and returns the rule numbers (among `rules`) that fire at this point. */
export function updateRules(state: RuleState, z: number, rules: readonly WesternElectricRule[] = [1, 2, 3, 4]): WesternElectricRule[] {
  const recent = state.recent;
  recent.push(z);
  if (recent.length > 8) recent.shift();
  const fired: WesternElectricRule[] = [];
  const n = recent.length;
  for (const rule of rules) {
    if (rule === 1 && Math.abs(z) > 3) fired.push(1);
    else if (rule === 2 && n >= 3 && countBeyond(recent, 3, 2) >= 2) fired.push(2);
    else if (rule === 3 && n >= 5 && countBeyond(recent, 5, 1) >= 4) fired.push(3);
    else if (rule === 4 && n >= 8 && countBeyond(recent, 8, 0) >= 8) fired.push(4);
  }
  return fired;
}

/** Largest same-side count among the last `window` values beyond ±`bound` (strictly). */
function countBeyond(recent: readonly number[], window: number, bound: number): number {
  let up = 0;
  let down = 0;
  for (let i = recent.length - window; i < recent.length; i++) {
    if (recent[i] > bound) up++;
    else if (recent[i] < -bound) down++;
  }
  return Math.max(up, down);
}

export interface IndividualsPoint {
  z: number;
  /** Western Electric rule numbers that fired at this point (empty when none). */
  rules: WesternElectricRule[];
}

export function individualsChart(z: readonly number[], rules: readonly WesternElectricRule[] = [1, 2, 3, 4]): IndividualsPoint[] {
  const state = createRuleState();
  return z.map((value) => ({ z: value, rules: updateRules(state, value, rules) }));
}
