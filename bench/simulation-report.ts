/**
 * Flag detection on simulated panels: runs the suite of
 * test/simulation/scenarios.ts through the real pipeline and writes the results table into the
 * "## Flag detection (simulation)" section of bench/README.md (replacing it, or appending it).
 * Run: `npx tsx bench/simulation-report.ts [--period-fits] [--only=NAME-PREFIX]` (--only: a quick look, do not commit its table) (a few minutes on two cores; with
 * --period-fits several more: the period model with its product:session LRT on one short panel).
 */
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { buildFlags, DEFAULT_THRESHOLDS } from '../analysis/flags/index.js';
import { chartFlagAgreement } from '../test/simulation/chart-agreement.js';
import { measureFlagDetection, periodFitParagraph, reportMarkdown } from '../test/simulation/measure.js';
import { broadScenarios, simulationScenarios } from '../test/simulation/scenarios.js';

const SECTION = '## Flag detection (simulation)';

/** Replaces the section (from its heading to the next "## " heading) or appends it. */
function replaceSection(readme: string, section: string): string {
  const start = readme.indexOf(SECTION);
  if (start < 0) return `${readme.trimEnd()}${readme.trim() ? '\n\n' : ''}${section.trimEnd()}\n`;
  const next = readme.indexOf('\n## ', start + SECTION.length);
  const end = next < 0 ? readme.length : next + 1;
  return `${readme.slice(0, start)}${section.trimEnd()}\n${next < 0 ? '' : '\n'}${readme.slice(end)}`;
}

const here = dirname(fileURLToPath(import.meta.url));
const readmePath = join(here, 'README.md');
let commit = 'unknown';
try {
  commit = execFileSync('git', ['rev-parse', '--short', 'HEAD'], { cwd: here, encoding: 'utf8' }).trim();
} catch {
  // not a git checkout: the table says "unknown"
}
// The classic suite (issue 4) and the broader panels (robust reference, jumps, swaps): 21.9 panel-years.
const only = process.argv.find((a) => a.startsWith('--only='))?.slice('--only='.length);
const scenarios = [...simulationScenarios(), ...broadScenarios()].filter((s) => !only || s.name.startsWith(only));
// One chart design on every panel: each drawn signal belongs to a case or carries a stated reason.
const agreement = { panels: 0, signals: 0, linked: 0, ewmaSignals: 0, unexplained: 0, unlinked: 0, problems: [] as string[] };
const report = await measureFlagDetection(
  (history) => buildFlags(history, DEFAULT_THRESHOLDS),
  scenarios,
  (name) => process.stderr.write(`simulating ${name}\n`),
  {
    onFlags: (scenario, history, flags) => {
      const result = chartFlagAgreement(history, flags);
      agreement.panels++;
      agreement.signals += result.pages.nSignals;
      agreement.linked += result.pages.nLinked;
      agreement.ewmaSignals += result.nSignals;
      agreement.unexplained += result.unexplained.length;
      agreement.unlinked += result.pages.unlinked.length;
      for (const u of result.unexplained) agreement.problems.push(`${scenario.name}: level chart ${u.assessor} ${u.chart} first signal ${u.session}`);
      for (const u of result.pages.unlinked) agreement.problems.push(`${scenario.name}: ${u.page}, ${u.chart}, ${u.point} (${u.reason ?? 'no reason'})`);
    },
  },
);
// The period model is slow (seconds per window and attribute), so its LRT path is measured on one
// short panel only, and only when asked: --period-fits.
let markdown = reportMarkdown(report, commit);
markdown =
  `${markdown.trimEnd()}\n\n` +
  `Charts and flags (one chart design), on every one of the ${agreement.panels} panels: every page's charts were built as the routes build them ` +
  `(overview, every assessor × attribute page, the control product and the product stability of every attribute, every case; test/simulation/chart-agreement.ts). ` +
  `${agreement.signals.toLocaleString('en-US')} signal points drawn, ${agreement.linked.toLocaleString('en-US')} of them on a case; ` +
  `**${agreement.unlinked} with neither a case nor a stated reason** (goal: none). ` +
  `Level and product step charts (${agreement.ewmaSignals.toLocaleString('en-US')} EWMA signal points) whose first signal in the current segment is not their drift (unstable-product) flag's signal session: **${agreement.unexplained}** (goal: none).\n` +
  agreement.problems.slice(0, 20).map((line) => `- ${line}\n`).join('');
if (process.argv.includes('--period-fits')) {
  const windowSessions = 12;
  const shortPanel = simulationScenarios().filter((s) => s.options.nWeeks <= 26);
  const withPeriods = await measureFlagDetection(
    (history) => buildFlags(history, DEFAULT_THRESHOLDS),
    shortPanel,
    (name) => process.stderr.write(`simulating ${name} with period fits\n`),
    { periodWindowSessions: windowSessions, driftDelays: false },
  );
  markdown = `${markdown.trimEnd()}\n\n${periodFitParagraph(withPeriods, windowSessions)}\n`;
}
const readme = existsSync(readmePath) ? readFileSync(readmePath, 'utf8') : '# Benchmarks\n';
if (!only) writeFileSync(readmePath, replaceSection(readme, markdown));
console.log(markdown);
