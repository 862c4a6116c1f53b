/**
 * Speed of the classic per-assessor indices and the panel reliability indices over a simulated
 * year (52 sessions × 10 attributes, 12 assessors × 6 products × 2 replicates, the design of the
 * fitting benchmark, simulated here with a seeded generator). No goal is set by the issue; the figure shows the indices are a
 * small share of a refit. Prints a markdown table row. Usage: npx tsx bench/assessor-indices.ts
 */
import type { Observation } from '../domain/ratings.js';
import { computeAssessorIndices } from '../analysis/indices/compute-assessor-indices.js';
import { balancedAnova } from '../analysis/indices/balanced-anova.js';
import { buildCellTable } from '../analysis/indices/cell-table.js';
import { kendallW } from '../analysis/reliability/kendall-w.js';
import { shroutFleissIcc } from '../analysis/reliability/shrout-fleiss-icc.js';
import { seededRandom } from '../analysis/reliability/seeded-random.js';

/** value = 5 + assessor level + product effect + interaction + error, rounded to 0.1. */
function simulateYear(seed: number): Observation[] {
  const uniform = seededRandom(seed);
  const normal = (sd: number) => sd * Math.sqrt(-2 * Math.log(1 - uniform())) * Math.cos(2 * Math.PI * uniform());
  const rows: Observation[] = [];
  for (let s = 1; s <= 52; s++) {
    for (let j = 1; j <= 10; j++) {
      const products = Array.from({ length: 6 }, () => normal(1.2));
      for (let a = 1; a <= 12; a++) {
        const level = normal(0.5);
        for (let p = 0; p < 6; p++) {
          const interaction = normal(0.4);
          for (let replicate = 1; replicate <= 2; replicate++) {
            const value = Math.round((5 + level + products[p] + interaction + normal(0.8)) * 10) / 10;
            rows.push({ session: `S${s}`, attribute: `attr${j}`, assessor: `A${a}`, product: String(101 + p), replicate, value });
          }
        }
      }
    }
  }
  return rows;
}

const groups = new Map<string, Observation[]>();
for (const row of simulateYear(20261202)) {
  const key = `${row.session}\u0000${row.attribute}`;
  const group = groups.get(key);
  if (group) group.push(row);
  else groups.set(key, [row]);
}
const allGroups = [...groups.values()];

/** Median CPU time (user + system) of `run`: wall time on a shared machine mostly measures the neighbours. */
function medianMs(run: () => void, repeats = 7): number {
  const times: number[] = [];
  for (let i = 0; i < repeats; i++) {
    const start = process.cpuUsage();
    run();
    const used = process.cpuUsage(start);
    times.push((used.user + used.system) / 1000);
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

console.log('| what | groups | median CPU time |');
console.log('| --- | --- | --- |');
console.log(`| computeAssessorIndices, every session × attribute of the year | ${allGroups.length} | ${indicesMs.toFixed(0)} ms |`);
console.log(`| six ICCs with CIs + Kendall W per session × attribute | ${allGroups.length} | ${reliabilityMs.toFixed(0)} ms |`);
console.log(`| Kendall W permutation p, 9,999 permutations, 12 assessors × 6 products | 1 | ${permutationMs.toFixed(0)} ms |`);
console.log(`(checksum ${checksum.toFixed(3)}; node ${process.version})`);
