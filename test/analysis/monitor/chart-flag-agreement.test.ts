/**
 * One chart design: the level charts the pages draw (assessorLevelCharts, act-level limits) agree
 * with the drift flags: the first EWMA signal of a chart's current segment is the signal session
 * of that chart's flag. Stated reasons instead of a flag: a per-attribute chart of an assessor with
 * an assessor-wide drift or jump flag (summarised there), and older segments closed by a
 * retraining restart (flags judge the current segment).
 * Then every page type (overview, assessor × attribute, control product, case) is built the way
 * the routes build it, and every signal drawn on any of its charts (individuals, EWMA, CUSUM)
 * must belong to a case or carry a stated reason (report/charts/chart-signals.ts). Checked on
 * the demo panel and on one simulated panel of every scenario family through the real fitting
 * pipeline. Narrowing the pages' L by 10 %, or drawing the EWMA with the watch limit, makes it fail.
 */
import { describe, expect, it } from 'vitest';
import { DEMO_OPTIONS } from '../../../demo/load-demo.js';
import { agreementOn } from '../../simulation/chart-agreement.js';
import { broadScenarios, simulationScenarios } from '../../simulation/scenarios.js';

describe('charts and flags agree (one chart design)', () => {
  it('demo panel: every drawn EWMA signal belongs to a drift flag; every signal on every page belongs to a case or says why not', async () => {
    const result = await agreementOn({ name: 'demo', options: DEMO_OPTIONS, cleanAssessors: [] });
    // The demo plants a drift, so the check is not vacuous.
    expect(result.nSignals).toBeGreaterThan(0);
    expect(result.unexplained).toEqual([]);
    expect(result.pages.nLinked).toBeGreaterThan(0);
    // The demo plants a product step too: its chart's signals belong to the unstable-product case.
    expect(result.pages.nProductLinked).toBeGreaterThan(0);
    expect(result.pages.unlinked).toEqual([]);
  }, 600_000);

  // One panel of every scenario family: A (classic), B (short years), C (one strong drifter), D (broad generator).
  it.each([simulationScenarios()[0], simulationScenarios()[1], broadScenarios()[0], broadScenarios()[1]].map((s) => [s.name, s] as const))(
    'simulated panel %s: every drawn EWMA signal belongs to a drift flag; every signal on every page belongs to a case or says why not',
    async (_name, scenario) => {
      const result = await agreementOn(scenario);
      expect(result.nSignals).toBeGreaterThan(0);
      expect(result.unexplained).toEqual([]);
      expect(result.pages.nSignals).toBeGreaterThan(0);
      expect(result.pages.unlinked).toEqual([]);
    },
    600_000,
  );
});
