/**
 * Swapped codes on held-out seeds: the scenarios of the simulation report (test/simulation/
 * scenarios.ts) with their generator seeds shifted, so the swap check can be judged on panels its
 * changes were not looked at on. Runs the real pipeline (fits, imports, buildFlags) and prints the
 * planted swaps found and the swapped-codes flags that match no planted swap; writes nothing.
 * Run: `npx tsx bench/swap-heldout.ts [--offsets=7919,104729] [--only=NAME-PREFIX]` (about half a
 * minute per offset on two cores).
 */
import { buildFlags, DEFAULT_THRESHOLDS } from '../analysis/flags/index.js';
import { historyUpTo, runPanel } from '../test/simulation/pipeline.js';
import { broadScenarios, simulationScenarios } from '../test/simulation/scenarios.js';
import { flagFindsFault } from '../test/simulation/scoring.js';

const offsets = (process.argv.find((a) => a.startsWith('--offsets='))?.slice('--offsets='.length) ?? '7919,104729,15485863').split(',').map(Number);
const only = process.argv.find((a) => a.startsWith('--only='))?.slice('--only='.length);
for (const offset of offsets) {
  let planted = 0;
  let found = 0;
  let panelYears = 0;
  const lines: string[] = [];
  for (const base of [...simulationScenarios(), ...broadScenarios()].filter((s) => !only || s.name.startsWith(only))) {
    const scenario = { ...base, name: `${base.name}+${offset}`, options: { ...base.options, seed: base.options.seed + offset } };
    const run = await runPanel(scenario);
    panelYears += run.panel.sessions.length / 52;
    const flags = buildFlags(historyUpTo(run), DEFAULT_THRESHOLDS).filter((f) => f.kind === 'swapped-codes');
    const swaps = run.panel.truth.filter((f) => f.kind === 'swapped-codes');
    for (const fault of swaps) {
      planted++;
      if (flags.some((f) => flagFindsFault(f, fault))) found++;
      else lines.push(`  missed ${scenario.name} ${fault.assessor} ${fault.firstSession} ${fault.product}/${fault.otherProduct}`);
    }
    for (const flag of flags.filter((f) => !swaps.some((fault) => flagFindsFault(f, fault)))) {
      lines.push(`  false  ${scenario.name} ${flag.assessor} ${flag.firstSession} ${(flag.evidence.products as string[]).join('/')} t₀ ${Number(flag.evidence.tServed).toFixed(2)}`);
    }
  }
  const falses = lines.filter((l) => l.startsWith('  false')).length;
  console.log(`seed offset ${offset}: swaps found ${found} of ${planted}; false swap alerts ${falses} in ${panelYears.toFixed(1)} panel-years`);
  for (const line of lines) console.log(line);
}
