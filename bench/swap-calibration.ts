/**
 * Calibration of the swap check's whole-session t₀ (methods §5.10) on simulated panels: every
 * testable pair of every clean assessor in every session (sessions that pass the check's gate of
 * three discriminating attributes), with the assessor's earlier sessions pooled as the flag engine
 * pools them. Under "served as labelled" t₀ should be about t_ν: prints its mean, SD and the
 * counts at or below −3.5 and −4 against what t_ν expects (the sum over the tests of P(t_ν ≤ ·)).
 * Two variants side by side: the slope pooled with the recent sessions' (as the check runs) and
 * the session's slope alone (the slopes left out of the history). Also t₀ and t₁ − t₀ of each
 * planted whole-session swap under both. Writes nothing.
 * Run: `npx tsx bench/swap-calibration.ts [--offsets=0,7919] [--only=NAME-PREFIX]` (about 40 s per
 * offset on two cores).
 */
import { DEFAULT_THRESHOLDS } from '../analysis/flags/index.js';
import { tUpperTail } from '../analysis/distributions/index.js';
import { assessorResidualSpreads, sessionData, SWAP_HISTORY_SESSIONS, type ResidualSpread } from '../analysis/quality/index.js';
import { wholeSessionTests, type WholeSessionTest } from '../analysis/quality/swapped-codes.js';
import type { Rating } from '../domain/ratings.js';
import { runPanel } from '../test/simulation/pipeline.js';
import { broadScenarios, simulationScenarios } from '../test/simulation/scenarios.js';

const offsets = (process.argv.find((a) => a.startsWith('--offsets='))?.slice('--offsets='.length) ?? '0,7919').split(',').map(Number);
const only = process.argv.find((a) => a.startsWith('--only='))?.slice('--only='.length);
const minAttributes = DEFAULT_THRESHOLDS.quality.swapMinAttributes;

interface Tally {
  n: number;
  sum: number;
  sumSq: number;
  le35: number;
  le4: number;
  expected35: number;
  expected4: number;
}
const tally = (): Tally => ({ n: 0, sum: 0, sumSq: 0, le35: 0, le4: 0, expected35: 0, expected4: 0 });
function add(t: Tally, test: WholeSessionTest): void {
  const { tServed, df } = test.stats;
  t.n++;
  t.sum += tServed;
  t.sumSq += tServed * tServed;
  if (tServed <= -3.5) t.le35++;
  if (tServed <= -4) t.le4++;
  t.expected35 += tUpperTail(3.5, df);
  t.expected4 += tUpperTail(4, df);
}
function line(label: string, t: Tally): string {
  const mean = t.sum / t.n;
  const sd = Math.sqrt(t.sumSq / t.n - mean * mean);
  return `${label}: ${t.n} tests, t₀ mean ${mean.toFixed(3)}, SD ${sd.toFixed(3)}, ≤ −3.5: ${t.le35} (t_ν expects ${t.expected35.toFixed(1)}), ≤ −4: ${t.le4} (expects ${t.expected4.toFixed(1)})`;
}
const withoutSlopes = (history: ReadonlyMap<string, readonly ResidualSpread[]>) =>
  new Map([...history].map(([assessor, list]) => [assessor, list.map(({ variance, df, nReplicates }) => ({ variance, df, nReplicates }))]));

const pooledAll = tally();
const aloneAll = tally();
for (const offset of offsets) {
  const pooled = tally();
  const alone = tally();
  const swapLines: string[] = [];
  for (const base of [...simulationScenarios(), ...broadScenarios()].filter((s) => !only || s.name.startsWith(only))) {
    const scenario = { ...base, name: `${base.name}+${offset}`, options: { ...base.options, seed: base.options.seed + offset } };
    const run = await runPanel(scenario);
    const clean = new Set(scenario.cleanAssessors);
    const swaps = run.panel.truth.filter((f) => f.kind === 'swapped-codes');
    const attributes = run.panel.attributes.map((a) => ({ name: a.name, scaleMin: a.scaleMin, scaleMax: a.scaleMax }));
    const bySession = new Map<string, Rating[]>();
    for (const r of run.panel.ratings) bySession.set(r.session, [...(bySession.get(r.session) ?? []), r]);
    const productP = new Map(run.results.map((r) => [`${r.session}|${r.attribute}`, r.productTestP]));
    const spreadHistory = new Map<string, ResidualSpread[]>();
    for (const { label } of run.panel.sessions) {
      const ratings = bySession.get(label);
      if (!ratings) continue;
      const data = sessionData(label, ratings, attributes);
      const prior = new Map([...spreadHistory].map(([assessor, list]) => [assessor, list.slice(-SWAP_HISTORY_SESSIONS)]));
      for (const [assessor, spread] of assessorResidualSpreads(data, minAttributes)) spreadHistory.set(assessor, [...(spreadHistory.get(assessor) ?? []), spread]);
      // The check's gate: a panel product test p < 0.05 in at least three attributes.
      if (attributes.filter((a) => (productP.get(`${label}|${a.name}`) ?? 1) < 0.05).length < 3) continue;
      const both = [wholeSessionTests(data, minAttributes, prior), wholeSessionTests(data, minAttributes, withoutSlopes(prior))] as const;
      for (const [tests, t, all] of [
        [both[0], pooled, pooledAll],
        [both[1], alone, aloneAll],
      ] as const) {
        for (const test of tests) {
          if (!clean.has(test.assessor)) continue;
          add(t, test);
          add(all, test);
        }
      }
      for (const fault of swaps.filter((f) => f.firstSession === label)) {
        const pair = (ts: readonly WholeSessionTest[]) =>
          ts.find((x) => x.assessor === fault.assessor && [x.productA, x.productB].sort().join('/') === [fault.product, fault.otherProduct].sort().join('/'));
        const [p, a] = [pair(both[0]), pair(both[1])];
        const fmt = (x: WholeSessionTest | undefined) => (x ? `t₀ ${x.stats.tServed.toFixed(2)}, t₁ − t₀ ${(x.stats.tSwapped - x.stats.tServed).toFixed(2)}, b ${x.stats.slope.toFixed(2)}` : 'not testable');
        swapLines.push(`  swap ${scenario.name} ${fault.assessor} ${label} ${fault.product}/${fault.otherProduct}: pooled slope ${fmt(p)}; session slope ${fmt(a)}`);
      }
    }
  }
  console.log(`seed offset ${offset}`);
  console.log(line('  clean assessors, slope pooled', pooled));
  console.log(line('  clean assessors, session slope', alone));
  for (const l of swapLines) console.log(l);
}
if (offsets.length > 1) {
  console.log(line('all offsets, slope pooled', pooledAll));
  console.log(line('all offsets, session slope', aloneAll));
}
