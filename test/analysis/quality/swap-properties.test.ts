/**
 * Properties of the swapped-codes test (docs/methods.md §5.10, §5.13) on sessions drawn here,
 * independently of the demo generator: several seeds and shapes (8 and 15 assessors, 4 and 8
 * products, 1–3 replicates, 8 or 10 attributes), assessors with their own level, scaling,
 * interaction and noise, and optionally a pair of near-identical products.
 * (a) a whole-session swap of two clearly different products is found;
 * (b) no swap is alleged between two products the panel cannot tell apart, even when one is planted;
 * (c) a lenient or inconsistent assessor with no swap gets no swap finding.
 * (f) the budget allocation: levels add up to the budget, equal effects give Bonferroni;
 * (g) on clean sessions, with a generous budget, findings stay within what the budget allows;
 * (h) on clean sessions with a history, t₀ stays about t_ν (slope and spread pooled);
 * (i) the pooled slope raises the power on an inconsistent assessor over the session's slope alone.
 * Invented data (a property test), the expected outcome written beside each case.
 */
import { describe, expect, it } from 'vitest';
import type { Rating } from '../../../domain/ratings.js';
import { assessorResidualSpreads, detectSwappedCodes, sessionData, type ResidualSpread, type SwapFinding } from '../../../analysis/quality/index.js';
import { swapCutoffs, swapRuleLevel, wholeSessionTests } from '../../../analysis/quality/swapped-codes.js';
import { tUpperTail } from '../../../analysis/distributions/index.js';
import { seededRandom } from '../flags/helpers/random.js';

interface Shape {
  seed: number;
  nAssessors: number;
  nProducts: number;
  nReplicates: number;
  nAttributes: number;
  /** Products P1 and P2 differ by at most 0.1 points on every attribute. */
  nearIdentical: boolean;
  /** Assessor → level shift in points (lenient > 0). */
  levels?: Record<string, number>;
  /** Assessor → multiplier of the replicate noise SD (inconsistent > 1). */
  noise?: Record<string, number>;
  /** Assessor whose P_a and P_b are exchanged in every replicate. */
  swap?: { assessor: string; a: string; b: string };
  /** Assessor → scaling of the product differences (else drawn from 0.85–1.18 per session). */
  scaling?: Record<string, number>;
}

const assessorName = (i: number) => `A${String(i + 1).padStart(2, '0')}`;
const productName = (i: number) => `P${i + 1}`;

/**
 * value = profile + assessor level (SD 0.3, + planted) + (scaling 0.85–1.18 − 1) × centred profile
 * + assessor × product (SD 0.3) + replicate noise (SD 0.45 × multiplier), kept on 0–10, 0.1 steps.
 */
function session(shape: Shape): { ratings: Rating[]; profiles: number[][] } {
  const rng = seededRandom(shape.seed);
  const profiles = Array.from({ length: shape.nProducts }, () => Array.from({ length: shape.nAttributes }, () => 1.5 + 7 * rng.uniform()));
  if (shape.nearIdentical) profiles[1] = profiles[0].map((v) => v + 0.2 * (rng.uniform() - 0.5));
  const attributeMean = Array.from({ length: shape.nAttributes }, (_, j) => profiles.reduce((s, p) => s + p[j], 0) / profiles.length);
  const ratings: Rating[] = [];
  for (let a = 0; a < shape.nAssessors; a++) {
    const assessor = assessorName(a);
    const level = rng.normal(0, 0.3) + (shape.levels?.[assessor] ?? 0);
    const drawn = 0.85 + 0.33 * rng.uniform();
    const scaling = shape.scaling?.[assessor] ?? drawn;
    const noiseSd = 0.45 * (shape.noise?.[assessor] ?? 1);
    const interaction = profiles.map(() => profiles[0].map(() => rng.normal(0, 0.3)));
    for (let p = 0; p < shape.nProducts; p++) {
      // The sample rated as product p: its own, or the other product's when codes were exchanged.
      let served = p;
      if (shape.swap?.assessor === assessor) {
        if (productName(p) === shape.swap.a) served = Number(shape.swap.b.slice(1)) - 1;
        else if (productName(p) === shape.swap.b) served = Number(shape.swap.a.slice(1)) - 1;
      }
      for (let r = 1; r <= shape.nReplicates; r++) {
        for (let j = 0; j < shape.nAttributes; j++) {
          const truth = profiles[served][j];
          const raw = attributeMean[j] + scaling * (truth - attributeMean[j]) + level + interaction[served][j] + rng.normal(0, noiseSd);
          const value = Math.min(10, Math.max(0, Math.round(raw * 10) / 10));
          ratings.push({ session: 'S01', date: '2026-02-02', assessor, product: productName(p), replicate: r, attribute: `attr${j + 1}`, value, code: String(100 + a * 40 + p * 4 + r) });
        }
      }
    }
  }
  return { ratings, profiles };
}

const attributesOf = (shape: Shape) => Array.from({ length: shape.nAttributes }, (_, j) => ({ name: `attr${j + 1}`, scaleMin: 0, scaleMax: 10 }));

function detect(shape: Shape, priorSpreads?: ReadonlyMap<string, readonly ResidualSpread[]>, falseAlertsPerYear = 0.05): { findings: SwapFinding[]; profiles: number[][] } {
  const { ratings, profiles } = session(shape);
  const attributes = attributesOf(shape);
  // The panel product test is part of the caller's gate (fits); every attribute here has real product differences.
  const productTestP = new Map(attributes.map((a) => [a.name, 0.001]));
  const findings = detectSwappedCodes(sessionData('S01', ratings, attributes), productTestP, { minRelativeGain: 0.3, minAttributes: 5, falseAlertsPerYear, sessionsPerYear: 52 }, priorSpreads);
  return { findings, profiles };
}

/** Residual spreads of each assessor in `n` earlier sessions of the same panel shape (other draws), oldest first. */
function history(shape: Shape, n: number): Map<string, ResidualSpread[]> {
  const out = new Map<string, ResidualSpread[]>();
  for (let k = 1; k <= n; k++) {
    const earlier = session({ ...shape, seed: shape.seed * 100 + k, swap: undefined });
    for (const [assessor, spread] of assessorResidualSpreads(sessionData('S01', earlier.ratings, attributesOf(shape)), 5)) {
      out.set(assessor, [...(out.get(assessor) ?? []), spread]);
    }
  }
  return out;
}

/** The same history with the slopes left out: the session's own slope is used alone. */
function withoutSlopes(prior: ReadonlyMap<string, readonly ResidualSpread[]>): Map<string, ResidualSpread[]> {
  return new Map([...prior].map(([assessor, list]) => [assessor, list.map(({ variance, df, nReplicates }) => ({ variance, df, nReplicates }))]));
}

/** Seeds × shapes: 8 and 15 assessors, 4 and 8 products, 1–3 replicates. */
function shapes(nearIdentical: boolean): Omit<Shape, 'levels' | 'noise' | 'swap'>[] {
  const out: Omit<Shape, 'levels' | 'noise' | 'swap'>[] = [];
  let seed = nearIdentical ? 900 : 100;
  for (const nAssessors of [8, 15]) {
    for (const nProducts of [4, 8]) {
      for (const nReplicates of [1, 2, 3]) {
        for (let k = 0; k < 2; k++) out.push({ seed: seed++, nAssessors, nProducts, nReplicates, nAttributes: k === 0 ? 8 : 10, nearIdentical });
      }
    }
  }
  return out;
}

const distance = (x: number[], y: number[]) => Math.sqrt(x.reduce((s, v, j) => s + (v - y[j]) ** 2, 0));
const names = (f: Pick<SwapFinding, 'productA' | 'productB'>) => [f.productA, f.productB].sort().join('/');

/**
 * Whole-session swaps planted on an inconsistent assessor A02 (noise × 2.5), one per pair of
 * products whose profiles lie `from`–`to` of that assessor's SDs of a difference apart (from their
 * replicate noise alone, 0.45 × 2.5 × √(2 / replicates) points; the profiles' Euclidean distance),
 * over seeds and shapes, each with five earlier sessions of the same assessor.
 */
function noisySwaps(from: number, to: number): { shape: Shape; pair: string; prior: Map<string, ResidualSpread[]> }[] {
  const out: { shape: Shape; pair: string; prior: Map<string, ResidualSpread[]> }[] = [];
  for (const base of shapes(false)) {
    const noise = { A02: 2.5 };
    const { profiles } = session(base);
    const sdDifference = 0.45 * 2.5 * Math.sqrt(2 / base.nReplicates);
    const prior = history({ ...base, noise }, 5);
    for (let a = 0; a < profiles.length; a++) {
      for (let b = a + 1; b < profiles.length; b++) {
        const d = distance(profiles[a], profiles[b]) / sdDifference;
        if (d < from || d > to) continue;
        out.push({ shape: { ...base, noise, swap: { assessor: 'A02', a: productName(a), b: productName(b) } }, pair: [productName(a), productName(b)].sort().join('/'), prior });
      }
    }
  }
  return out;
}

describe('swapped codes: properties over seeds and panel shapes', () => {
  it('(a) a whole-session swap of the two most different products is found, for exactly that pair and assessor', () => {
    for (const base of shapes(false)) {
      const { profiles } = session(base);
      // The two most different products of this draw (their profiles are ≥ 5 points apart: checked).
      let best = { a: 0, b: 1, d: -1 };
      for (let a = 0; a < profiles.length; a++) for (let b = a + 1; b < profiles.length; b++) if (distance(profiles[a], profiles[b]) > best.d) best = { a, b, d: distance(profiles[a], profiles[b]) };
      expect(best.d).toBeGreaterThan(5);
      const swap = { assessor: 'A02', a: productName(best.a), b: productName(best.b) };
      const { findings } = detect({ ...base, swap });
      const label = `seed ${base.seed}, ${base.nAssessors} assessors × ${base.nProducts} products × ${base.nReplicates} replicates`;
      expect(findings.map((f) => `${f.assessor} ${names(f)} ${f.replicate}`), label).toContain(`A02 ${[swap.a, swap.b].sort().join('/')} null`);
      // Nothing else in the session: the other assessors are clean.
      expect(findings.filter((f) => f.assessor !== 'A02'), label).toEqual([]);
    }
  });

  it('(b) no swap is alleged between near-identical products, even when one is planted', () => {
    for (const base of shapes(true)) {
      const label = `seed ${base.seed}, ${base.nAssessors} × ${base.nProducts} × ${base.nReplicates}`;
      for (const assessor of ['A01', 'A03']) {
        const { findings } = detect({ ...base, swap: { assessor, a: 'P1', b: 'P2' } });
        expect(findings.filter((f) => names(f) === 'P1/P2'), label).toEqual([]);
      }
      // And a clean session gives no finding at all.
      expect(detect(base).findings, label).toEqual([]);
    }
  });

  it('(c) a lenient (+1.5 points) or inconsistent (noise × 2.5) assessor with no swap gets no swap finding', () => {
    for (const nearIdentical of [false, true]) {
      for (const base of shapes(nearIdentical)) {
        const label = `seed ${base.seed}, ${base.nAssessors} × ${base.nProducts} × ${base.nReplicates}, near-identical ${nearIdentical}`;
        const { findings } = detect({ ...base, levels: { A01: 1.5, A04: -1.5 }, noise: { A02: 2.5, A03: 2.5 } });
        expect(findings.map((f) => `${f.assessor} ${names(f)} replicate ${f.replicate}`), label).toEqual([]);
      }
    }
  });

  it('(d) an inconsistent assessor (noise × 2.5) with a swap of two products 4–6 of their SDs apart is found in ≥ 95 % of cases when five earlier sessions are pooled', () => {
    // Alone (no history) this assessor's pairs at that distance are found in 120 of 128 cases here.
    const cases = noisySwaps(4, 6);
    let found = 0;
    for (const { shape, pair, prior } of cases) {
      const { findings } = detect(shape, prior);
      if (findings.some((f) => f.assessor === 'A02' && f.replicate === null && names(f) === pair)) found++;
      // Never another pair or another assessor.
      expect(findings.filter((f) => f.assessor !== 'A02' || names(f) !== pair), `seed ${shape.seed} ${pair}`).toEqual([]);
    }
    expect(cases.length).toBeGreaterThan(100);
    expect(found / cases.length).toBeGreaterThanOrEqual(0.95);
  });

  it('(e) with five earlier sessions pooled, an inconsistent assessor with no swap gets no swap finding, also on a day much noisier than their history', () => {
    for (const nearIdentical of [false, true]) {
      for (const base of shapes(nearIdentical)) {
        const label = `seed ${base.seed}, ${base.nAssessors} × ${base.nProducts} × ${base.nReplicates}, near-identical ${nearIdentical}`;
        const today = { ...base, levels: { A01: 1.5, A04: -1.5 }, noise: { A02: 2.5, A03: 2.5 } };
        // A02's history is as noisy as today; A03 is usually consistent (noise × 1) and noisy today only.
        const prior = history({ ...base, noise: { A02: 2.5 } }, 5);
        const { findings } = detect(today, prior);
        expect(findings.map((f) => `${f.assessor} ${names(f)} replicate ${f.replicate}`), label).toEqual([]);
      }
    }
  });

  it('(h) on clean sessions with five earlier ones pooled (slope and spread), t₀ stays about t_ν, also for an assessor whose scaling today is not their usual one', () => {
    // Every testable pair of every assessor: A02 inconsistent (noise × 2.5) today and before; A03
    // steeper before (scaling 1.3) than today (0.75), so their history predicts a slope too large
    // for today (the slope check's job); the other assessors' scaling is drawn anew every session,
    // so their slopes also vary between sessions beyond sampling error (the random-effects part,
    // felt most with 4 products, where the slope's variance weighs most in the SE).
    const all: number[] = [];
    const fourProducts: number[] = [];
    let expectedBelow3 = 0;
    for (let round = 0; round < 3; round++) {
      for (const nearIdentical of [false, true]) {
        for (const base of shapes(nearIdentical)) {
          const shape = { ...base, seed: base.seed + 5000 + 1000 * round, noise: { A02: 2.5 } };
          const prior = history({ ...shape, scaling: { A03: 1.3 } }, 5);
          const { ratings } = session({ ...shape, scaling: { A03: 0.75 } });
          for (const test of wholeSessionTests(sessionData('S01', ratings, attributesOf(shape)), 5, prior)) {
            all.push(test.stats.tServed);
            if (shape.nProducts === 4) fourProducts.push(test.stats.tServed);
            expectedBelow3 += tUpperTail(3, test.stats.df);
          }
        }
      }
    }
    const mean = (v: number[]) => v.reduce((a, x) => a + x, 0) / v.length;
    const sd = (v: number[]) => Math.sqrt(v.reduce((a, x) => a + (x - mean(v)) ** 2, 0) / (v.length - 1));
    expect(all.length).toBeGreaterThan(20000);
    expect(fourProducts.length).toBeGreaterThan(3000);
    // t_ν with ν ≥ 15 has SD ≤ 1.07 (ν is larger with the history pooled): a too-narrow SE
    // (the slope's between-session variance left out, or no slope check) widens t₀ beyond these.
    expect(mean(all)).toBeGreaterThan(-0.05);
    expect(mean(all)).toBeLessThan(0.1);
    expect(sd(all)).toBeGreaterThan(0.93);
    expect(sd(all)).toBeLessThan(1.05);
    expect(sd(fourProducts)).toBeLessThan(1.1);
    // The lower tail the cut-offs are set in: no more than t_ν's count and its Poisson 99.9 % margin.
    const below3 = all.filter((v) => v <= -3).length;
    expect(below3).toBeLessThanOrEqual(expectedBelow3 + 3.1 * Math.sqrt(expectedBelow3));
  });

  it('(i) the pooled slope finds more swaps of an inconsistent assessor than the session\'s slope alone, with nothing else alleged', () => {
    // Pairs 3–6 of the assessor's SDs apart. Power: the shift a swap makes in t₀ (t₁ − t₀, its
    // noncentrality, not using the pair's contrast) and the swaps found, with the history's slopes
    // pooled and left out.
    const cases = noisySwaps(3, 6);
    const found = { pooled: 0, alone: 0 };
    const shift = { pooled: 0, alone: 0 };
    const shift4 = { pooled: 0, alone: 0 };
    for (const { shape, pair, prior } of cases) {
      const data = sessionData('S01', session(shape).ratings, attributesOf(shape));
      for (const [variant, spreads] of [
        ['pooled', prior],
        ['alone', withoutSlopes(prior)],
      ] as const) {
        const test = wholeSessionTests(data, 5, spreads).find((t) => t.assessor === 'A02' && names(t) === pair);
        const effect = test ? test.stats.tSwapped - test.stats.tServed : 0;
        shift[variant] += effect;
        if (shape.nProducts === 4) shift4[variant] += effect;
        const { findings } = detect(shape, spreads);
        if (findings.some((f) => f.assessor === 'A02' && f.replicate === null && names(f) === pair)) found[variant]++;
        expect(findings.filter((f) => f.assessor !== 'A02' || names(f) !== pair), `seed ${shape.seed} ${pair} ${variant}`).toEqual([]);
      }
    }
    expect(cases.length).toBeGreaterThan(100);
    expect(found.pooled).toBeGreaterThanOrEqual(found.alone);
    expect(shift.pooled).toBeGreaterThan(shift.alone);
    // With 4 products the pooled pair leaves 3 rows for the session's slope: Var(b̂) weighs most.
    expect(shift4.pooled).toBeGreaterThan(1.08 * shift4.alone);
  });

  it('(f) the cut-offs spend the budget through the rules\' own levels; equal effects give the Bonferroni cut-off', () => {
    // A rule's level is the t probability of its rejection interval (t₁ = t₀ + effect): checked by hand.
    expect(swapRuleLevel(4, 3, 50)).toBeCloseTo(tUpperTail(4, 50) - tUpperTail(7, 50), 15);
    expect(swapRuleLevel(4, 12, 50)).toBeCloseTo(tUpperTail(8, 50) - tUpperTail(16, 50), 15);
    expect(swapRuleLevel(4, 0, 50)).toBe(0);
    // Equal effects below twice the cut-off: every test at alpha / m, the plain Bonferroni level.
    const equal = swapCutoffs(Array.from({ length: 40 }, () => ({ effect: 5, df: 200 })), 1e-3);
    for (const c of equal) expect(c).toBeCloseTo(equal[0], 12);
    expect(tUpperTail(equal[0], 200) - tUpperTail(equal[0] + 5, 200)).toBeCloseTo(1e-3 / 40, 8);
    // Mixed effects and df over seeds: the levels add up to the budget (within 1e-4 of it, never above).
    const rng = seededRandom(7);
    for (let k = 0; k < 20; k++) {
      const tests = Array.from({ length: 10 + Math.floor(rng.uniform() * 200) }, () => ({ effect: 0.1 + 25 * rng.uniform(), df: rng.uniform() < 0.2 ? 29 : 263 }));
      const budget = 10 ** (-2 - 3 * rng.uniform());
      const cutoffs = swapCutoffs(tests, budget);
      const spent = cutoffs.reduce((sum, c, i) => sum + swapRuleLevel(c, tests[i].effect, tests[i].df), 0);
      expect(spent).toBeLessThanOrEqual(budget);
      expect(spent).toBeGreaterThan(budget * (1 - 1e-4));
      // A pair whose swap would hardly show gets a cut-off it cannot pass in practice.
      cutoffs.forEach((c, i) => {
        if (tests[i].effect < 0.5) expect(c).toBeGreaterThan(8);
      });
    }
  });

  it('(g) clean sessions over seeds and shapes: with a budget of 0.05 false alerts per session, findings stay within it', () => {
    // 52 × 0.05 alerts per year = 0.05 per session (half to the whole-session check with replicates).
    // Expected at most 0.05 × sessions if the levels are right; allowed: the Poisson 99.9 % bound.
    let sessions = 0;
    let alerts = 0;
    for (let round = 0; round < 4; round++) {
      for (const nearIdentical of [false, true]) {
        for (const base of shapes(nearIdentical)) {
          const shape = { ...base, seed: base.seed + 1000 * (round + 1), noise: { A02: 2.5 } };
          alerts += detect(shape, history(shape, 3), 52 * 0.05).findings.length;
          sessions++;
        }
      }
    }
    expect(sessions).toBe(192);
    // Poisson(9.6): P(X > 20) < 0.001.
    expect(alerts).toBeLessThanOrEqual(20);
  });
});

