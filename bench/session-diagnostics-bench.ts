/**
 * fitSessionModel on balanced sessions with and without `withDiagnostics`: the closed form alone
 * against the closed form confirmed by the general machinery. Medians of 7 rounds of 500 fits
 * after a warm-up, the two modes side by side per design. Run: npx tsx bench/session-diagnostics-bench.ts
 */
import { fitSessionModel } from '../analysis/lmm/fit-session-model.js';
import type { Observation } from '../domain/ratings.js';

function balancedSession(seed: number, nAssessors: number, nProducts: number, nReplicates: number): Observation[] {
  let state = seed;
  const uniform = () => (state = (state * 16807) % 2147483647) / 2147483647;
  const rows: Observation[] = [];
  for (let a = 0; a < nAssessors; a++) {
    const assessorShift = uniform() - 0.5;
    for (let p = 0; p < nProducts; p++) {
      for (let r = 1; r <= nReplicates; r++) {
        rows.push({ session: 'S1', attribute: 'attr', assessor: `A${a}`, product: `P${p}`, replicate: r, value: 5 + assessorShift + 0.5 * p + uniform() });
      }
    }
  }
  return rows;
}

function medianMsPerFit(rows: Observation[], withDiagnostics: boolean): number {
  for (let i = 0; i < 200; i++) fitSessionModel(rows, { withDiagnostics });
  const rounds: number[] = [];
  for (let k = 0; k < 7; k++) {
    const start = performance.now();
    for (let i = 0; i < 500; i++) fitSessionModel(rows, { withDiagnostics });
    rounds.push((performance.now() - start) / 500);
  }
  return rounds.sort((x, y) => x - y)[3];
}

console.log('| design (assessors × products × replicates) | closed form only | withDiagnostics |');
console.log('| --- | --- | --- |');
for (const [nAssessors, nProducts, nReplicates] of [
  [8, 4, 2],
  [12, 6, 3],
]) {
  const rows = balancedSession(20261204 + nAssessors, nAssessors, nProducts, nReplicates);
  const quick = medianMsPerFit(rows, false);
  const full = medianMsPerFit(rows, true);
  console.log(`| ${nAssessors} × ${nProducts} × ${nReplicates} | ${quick.toFixed(2)} ms | ${full.toFixed(2)} ms |`);
}
