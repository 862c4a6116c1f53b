/**
 * Speed of the classic per-assessor indices and the panel reliability indices over a simulated
 * year (bench/simulate-panel.ts YEAR_DESIGN: 52 sessions × 10 attributes, 12 assessors ×
 * 6 products × 2 replicates). No goal is set by the issue; the figure shows the indices are a
 * small share of a refit. Prints a markdown table row. Usage: npx tsx bench/assessor-indices.ts
 */
import { performance } from 'node:perf_hooks';
import type { Observation } from '../domain/ratings.js';
import { computeAssessorIndices } from '../analysis/indices/compute-assessor-indices.js';
import { balancedAnova } from '../analysis/indices/balanced-anova.js';
import { buildCellTable } from '../analysis/indices/cell-table.js';
import { kendallW } from '../analysis/reliability/kendall-w.js';
import { shroutFleissIcc } from '../analysis/reliability/shrout-fleiss-icc.js';
import { simulatePanel, YEAR_DESIGN } from './simulate-panel.js';

const groups = new Map<string, Observation[]>();
for (const row of simulatePanel(YEAR_DESIGN)) {
  const key = `${row.session}\u0000${row.attribute}`;
  const group = groups.get(key);
  if (group) group.push(row);
  else groups.set(key, [row]);
}
const allGroups = [...groups.values()];

function medianMs(run: () => void, repeats = 7): number {
  const times: number[] = [];
  for (let i = 0; i < repeats; i++) {
    const start = performance.now();
    run();
    times.push(performance.now() - start);
  }
  times.sort((a, b) => a - b);
  return times[Math.floor(times.length / 2)];
}

let checksum = 0;
const indicesMs = medianMs(() => {
  for (const group of allGroups) checksum += computeAssessorIndices(group).length;
});
const reliabilityMs = medianMs(() => {
  for (const group of allGroups) {
    const anova = balancedAnova(buildCellTable(group))!;
    const matrix = anova.cellMeans[0].map((_, p) => anova.cellMeans.map((row) => row[p]));
    checksum += shroutFleissIcc(matrix).estimates.length + (kendallW(anova.cellMeans).W ?? 0);
  }
});
const permutationMs = medianMs(() => {
  const anova = balancedAnova(buildCellTable(allGroups[0]))!;
  checksum += kendallW(anova.cellMeans, { permutations: 9999, seed: 1 }).permutationPValue ?? 0;
}, 3);

console.log('| what | groups | median time |');
console.log('| --- | --- | --- |');
console.log(`| computeAssessorIndices, every session × attribute of the year | ${allGroups.length} | ${indicesMs.toFixed(0)} ms |`);
console.log(`| six ICCs with CIs + Kendall W per session × attribute | ${allGroups.length} | ${reliabilityMs.toFixed(0)} ms |`);
console.log(`| Kendall W permutation p, 9,999 permutations, 12 assessors × 6 products | 1 | ${permutationMs.toFixed(0)} ms |`);
console.log(`(checksum ${checksum.toFixed(3)}; node ${process.version})`);
