/**
 * Period-fit CPU per demo window (the period-fit part of the refit): the
 * demo year (seed 2026), windows 1–12, 13–24, 25–36, 37–48, 41–52 (and 40–51) × 10 attributes,
 * `fitPeriodModel` with the product:session LRT, CPU time per fit, evaluations and iterations.
 * `--json FILE` writes every fit's estimates for comparing two builds. `--warm` also fits the
 * latest window (41–52) started from the fit of the previous latest window (40–51) of the same
 * attribute, as a refit after one new session does. `--varpar` also times the Satterthwaite step
 * alone (varparCovariance at each cold fit's θ̂), exact pieces and central differences
 * alternated, and prints the largest difference of the denominator df between the two.
 *
 *   npx tsx bench/period-window-bench.ts [--reps N] [--json FILE] [--warm] [--varpar]
 */
import { writeFileSync } from 'node:fs';
import { generatePanel } from '../demo/generate-panel.js';
import { makeRemlObjective } from '../analysis/lmm/criterion.js';
import { fitPeriodModel, relativeSdsFromVariances, type PeriodModelFit } from '../analysis/lmm/fit-period-model.js';
import { productContrastRows, productFTest, varparCovariance } from '../analysis/lmm/satterthwaite.js';
import type { Observation } from '../domain/ratings.js';

const argValue = (name: string): string | undefined => {
  const index = process.argv.indexOf(name);
  return index > 0 ? process.argv[index + 1] : undefined;
};
const reps = Number(argValue('--reps') ?? 2);
const jsonPath = argValue('--json');
const warm = process.argv.includes('--warm');
const varpar = process.argv.includes('--varpar');

const panel = generatePanel({ seed: 2026, nWeeks: 52, nAssessors: 12, startDate: '2026-01-05', faults: 'demo', nAttributes: 10 });
const labels = panel.sessions.map((s) => s.label);
const windows = [[0, 12], [12, 24], [24, 36], [36, 48], [39, 51], [40, 52]].map(([a, b]) => new Set(labels.slice(a, b)));
const attributes = [...new Set(panel.ratings.map((r) => r.attribute))].sort();
const jobs: { name: string; observations: Observation[] }[] = [];
for (const [w, window] of windows.entries()) {
  for (const attribute of attributes) {
    const observations = panel.ratings
      .filter((r) => r.attribute === attribute && window.has(r.session) && r.value !== null && Number.isFinite(r.value))
      .map((r) => ({ assessor: r.assessor, product: r.product, session: r.session, replicate: r.replicate, attribute: r.attribute, value: r.value as number }));
    jobs.push({ name: `w${w}:${attribute}`, observations: observations as Observation[] });
  }
}

const cpuMs = (): number => {
  const usage = process.cpuUsage();
  return (usage.user + usage.system) / 1000;
};
const results: Record<string, unknown> = {};
const perRep: number[][] = [];
const firstFits: PeriodModelFit[] = [];
for (let rep = 0; rep < reps; rep++) {
  const times: number[] = [];
  let evaluations = 0;
  for (const job of jobs) {
    const start = cpuMs();
    const fit = fitPeriodModel(job.observations);
    times.push(cpuMs() - start);
    evaluations += fit.diagnostics.evaluations;
    if (rep === 0) firstFits.push(fit);
    if (rep === 0) results[job.name] = { json: fit.json, lrt: fit.productSessionLrt, iterations: fit.diagnostics.iterations, evaluations: fit.diagnostics.evaluations, converged: fit.diagnostics.converged };
  }
  perRep.push(times);
  if (warm) {
    const warmTimes: number[] = [];
    let warmEvaluations = 0;
    for (const attribute of attributes) {
      const previous = fitPeriodModel(jobs.find((j) => j.name === `w4:${attribute}`)!.observations);
      const start = cpuMs();
      const fit = fitPeriodModel(jobs.find((j) => j.name === `w5:${attribute}`)!.observations, {
        startRelativeSds: relativeSdsFromVariances(previous.json.variance) ?? undefined,
        startReducedRelativeSds: previous.reducedRelativeSds ?? undefined,
      });
      warmTimes.push(cpuMs() - start);
      warmEvaluations += fit.diagnostics.evaluations;
      if (rep === 0) results[`warm:${attribute}`] = { json: fit.json, lrt: fit.productSessionLrt, iterations: fit.diagnostics.iterations, evaluations: fit.diagnostics.evaluations, converged: fit.diagnostics.converged };
    }
    const warmTotal = warmTimes.reduce((s, t) => s + t, 0);
    console.log(`  warm-started latest window: CPU per fit mean ${(warmTotal / warmTimes.length).toFixed(1)} ms, evaluations ${(warmEvaluations / warmTimes.length).toFixed(1)} per fit`);
  }
  const sorted = [...times].sort((a, b) => a - b);
  const total = times.reduce((s, t) => s + t, 0);
  console.log(`rep ${rep + 1}: ${jobs.length} fits, CPU per fit mean ${(total / jobs.length).toFixed(1)} ms, median ${sorted[Math.floor(sorted.length / 2)].toFixed(1)} ms, max ${sorted[sorted.length - 1].toFixed(1)} ms, evaluations ${(evaluations / jobs.length).toFixed(1)} per fit`);
}
if (jsonPath) writeFileSync(jsonPath, JSON.stringify(results));
if (varpar) {
  const methods = ['exact', 'differences'] as const;
  const totals = { exact: 0, differences: 0 };
  let largestDfDifference = 0;
  for (let rep = 0; rep < reps; rep++) {
    for (const fit of firstFits) {
      const objective = makeRemlObjective(fit.fit.frame);
      const theta = Float64Array.from(fit.fit.theta);
      const solution = objective.solve(theta);
      const denDf: number[] = [];
      for (const method of rep % 2 === 0 ? methods : [...methods].reverse()) {
        const start = cpuMs();
        const covariance = varparCovariance(objective, theta, solution.sigma, { method });
        totals[method] += cpuMs() - start;
        const covBeta = Float64Array.from(solution.unscaledCovBeta, (value) => value * solution.sigma * solution.sigma);
        denDf.push(productFTest(solution.beta, covBeta, productContrastRows(objective.frame.xTx, objective.frame.nFixed), covariance).denDf ?? NaN);
      }
      largestDfDifference = Math.max(largestDfDifference, Math.abs(denDf[0] - denDf[1]) / denDf[1]);
    }
  }
  const calls = reps * firstFits.length;
  console.log(`Satterthwaite step alone (${calls} calls each): CPU per call exact ${(totals.exact / calls).toFixed(1)} ms, differences ${(totals.differences / calls).toFixed(1)} ms; largest relative difference of denDf ${largestDfDifference.toExponential(1)}`);
}
