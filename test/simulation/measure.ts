/**
 * Runs the flag engine on every simulated panel and measures, per flag kind, the share of planted
 * faults found, the act-level flags on clean assessors, and the delay from the start of a drift
 * to its first flag (the engine re-run on the history as it stood after each session).
 */
import type { Flag, FlagKind } from '../../domain/flags.js';
import { FLAG_KINDS } from '../../domain/flags.js';
import type { PanelHistory } from '../../analysis/monitor/series.js';
import { historyUpTo, runPanel, type PanelRun } from './pipeline.js';
import { simulationScenarios, type SimulationScenario } from './scenarios.js';
import { addTallies, emptyTallies, flagFindsFault, median, scorePanel, type KindTally } from './scoring.js';

export type FlagEngine = (history: PanelHistory) => Flag[];

export interface DriftDelay {
  panel: string;
  assessor: string;
  ratePerSession: number;
  /** Sessions from the first drifting session (= 1) to the first drift flag; null = never flagged. */
  sessionsToFirstFlag: number | null;
  /** A drift flag for the assessor already stood before the drift began (a false alarm then). */
  flaggedBeforeStart: boolean;
}

export interface StepDelay {
  panel: string;
  assessor: string;
  sizePoints: number;
  stepSession: string;
  /** Sessions from the step (its own session = 0) to the first act-level drift flag; null = none. */
  sessionsToAct: number | null;
  /** The flag's sentence at that point. */
  message: string | null;
}

export interface FamilyTally {
  family: string;
  nPanels: number;
  panelYears: number;
  cleanAssessorYears: number;
  cleanAct: number;
  cleanWatch: number;
  cleanByKind: Partial<Record<FlagKind, number>>;
  /** Drift flags (any severity) on clean assessors: the echo of a drifter shows here. */
  cleanDrift: { panel: string; flag: Flag }[];
}

export interface SimulationReport {
  families: FamilyTally[];
  stepDelays: StepDelay[];
  /** Swapped-codes flags that match no planted swap. */
  falseSwaps: { panel: string; flag: Flag }[];
  panelYears: number;
  panels: { name: string; nWeeks: number; nAssessors: number; nClean: number; nFlags: number; nUnfitted: number }[];
  byKind: KindTally[];
  cleanActFlags: { panel: string; flag: Flag }[];
  cleanWatchFlagCount: number;
  /** Watch-level flags on clean assessors by kind. */
  cleanWatchByKind: Partial<Record<FlagKind, number>>;
  cleanAssessorYears: number;
  /** Act-level flags on clean assessors per 10 clean assessor-years. */
  cleanActPer10AssessorYears: number;
  stableProductActFlags: { panel: string; flag: Flag }[];
  driftDelays: DriftDelay[];
  medianDriftDelaySessions: number | null;
  elapsedMs: number;
}

export async function measureFlagDetection(
  buildFlags: FlagEngine,
  scenarios: SimulationScenario[] = simulationScenarios(),
  onPanel?: (name: string) => void,
  options: {
    periodWindowSessions?: number;
    driftDelays?: boolean;
    /** Sees each panel's whole history and its flags (the simulation report checks the charts against them). */
    onFlags?: (scenario: SimulationScenario, history: PanelHistory, flags: Flag[]) => void;
  } = {},
): Promise<SimulationReport> {
  const started = performance.now();
  const total = emptyTallies();
  const report: Omit<SimulationReport, 'byKind' | 'cleanActPer10AssessorYears' | 'medianDriftDelaySessions' | 'elapsedMs'> = {
    families: [],
    stepDelays: [],
    falseSwaps: [],
    panelYears: 0,
    panels: [],
    cleanActFlags: [],
    cleanWatchFlagCount: 0,
    cleanWatchByKind: {},
    cleanAssessorYears: 0,
    stableProductActFlags: [],
    driftDelays: [],
  };
  for (const scenario of scenarios) {
    onPanel?.(scenario.name);
    const run = await runPanel(scenario, { periodWindowSessions: options.periodWindowSessions });
    const history = historyUpTo(run);
    const flags = buildFlags(history);
    options.onFlags?.(scenario, history, flags);
    const sessionsPresent = new Map<string, number>();
    for (const session of run.panel.sessions) for (const a of session.assessors) sessionsPresent.set(a, (sessionsPresent.get(a) ?? 0) + 1);
    const dropped = new Set(run.panel.droppedSamples.map((d) => `${d.session}|${d.assessor}`));
    const expected = (flag: Flag) => flag.kind === 'missing-cells' && dropped.has(`${flag.firstSession}|${flag.assessor}`);
    const score = scorePanel(flags, run.panel.truth, scenario.cleanAssessors, run.panel.sessions.length, scenario.name, { sessionsPresent, expected });
    const years = run.panel.sessions.length / 52;
    report.panelYears += years;
    const familyName = scenario.family ?? 'classic';
    let family = report.families.find((f) => f.family === familyName);
    if (!family) report.families.push((family = { family: familyName, nPanels: 0, panelYears: 0, cleanAssessorYears: 0, cleanAct: 0, cleanWatch: 0, cleanByKind: {}, cleanDrift: [] }));
    family.nPanels++;
    family.panelYears += years;
    family.cleanAssessorYears += score.cleanAssessorYears;
    family.cleanAct += score.cleanActFlags.length;
    family.cleanWatch += score.cleanWatchFlags.length;
    for (const flag of [...score.cleanActFlags, ...score.cleanWatchFlags]) family.cleanByKind[flag.kind] = (family.cleanByKind[flag.kind] ?? 0) + 1;
    family.cleanDrift.push(...[...score.cleanActFlags, ...score.cleanWatchFlags].filter((f) => f.kind === 'drift').map((flag) => ({ panel: scenario.name, flag })));
    const swaps = run.panel.truth.filter((f) => f.kind === 'swapped-codes');
    report.falseSwaps.push(...flags.filter((f) => f.kind === 'swapped-codes' && !swaps.some((fault) => flagFindsFault(f, fault))).map((flag) => ({ panel: scenario.name, flag })));
    if (options.driftDelays ?? true) report.stepDelays.push(...stepDelays(run, buildFlags));
    addTallies(total, score.byKind);
    report.panels.push({
      name: scenario.name,
      nWeeks: run.panel.sessions.length,
      nAssessors: run.panel.assessors.length,
      nClean: scenario.cleanAssessors.length,
      nFlags: flags.length,
      nUnfitted: run.unfitted.length,
    });
    report.cleanActFlags.push(...score.cleanActFlags.map((flag) => ({ panel: scenario.name, flag })));
    report.cleanWatchFlagCount += score.cleanWatchFlags.length;
    for (const flag of score.cleanWatchFlags) report.cleanWatchByKind[flag.kind] = (report.cleanWatchByKind[flag.kind] ?? 0) + 1;
    report.cleanAssessorYears += score.cleanAssessorYears;
    report.stableProductActFlags.push(...score.stableProductActFlags.map((flag) => ({ panel: scenario.name, flag })));
    if (options.driftDelays ?? true) report.driftDelays.push(...driftDelays(run, buildFlags));
  }
  const found = report.driftDelays.map((d) => d.sessionsToFirstFlag).filter((d): d is number => d !== null);
  return {
    ...report,
    byKind: FLAG_KINDS.map((kind: FlagKind) => total.get(kind)!),
    cleanActPer10AssessorYears: report.cleanAssessorYears > 0 ? (10 * report.cleanActFlags.length) / report.cleanAssessorYears : 0,
    medianDriftDelaySessions: found.length === report.driftDelays.length ? median(found) : null,
    elapsedMs: performance.now() - started,
  };
}

/** For each planted drift: the first history length at which the engine flags drift for that assessor. */
function driftDelays(run: PanelRun, buildFlags: FlagEngine): DriftDelay[] {
  const out: DriftDelay[] = [];
  for (const fault of run.panel.truth.filter((f) => f.kind === 'drift' && f.shape !== 'step')) {
    const flaggedBeforeStart = buildFlags(historyUpTo(run, fault.fromSession)).some((flag) => flagFindsFault(flag, fault));
    let delay: number | null = null;
    for (let n = fault.fromSession + 1; n <= run.panel.sessions.length; n++) {
      if (buildFlags(historyUpTo(run, n)).some((flag) => flagFindsFault(flag, fault))) {
        delay = n - fault.fromSession;
        break;
      }
    }
    out.push({ panel: run.scenario.name, assessor: fault.assessor!, ratePerSession: fault.size!, sessionsToFirstFlag: delay, flaggedBeforeStart });
  }
  return out;
}

/** For each planted step: sessions from the step's own session (0) to the first act-level drift flag. */
function stepDelays(run: PanelRun, buildFlags: FlagEngine): StepDelay[] {
  const out: StepDelay[] = [];
  for (const fault of run.panel.truth.filter((f) => f.kind === 'drift' && f.shape === 'step')) {
    let found: StepDelay | null = null;
    // Up to 8 sessions after the step; an act flag later than that counts as not found in time.
    for (let n = fault.fromSession + 1; n <= Math.min(run.panel.sessions.length, fault.fromSession + 9) && !found; n++) {
      const flag = buildFlags(historyUpTo(run, n)).find((f) => f.severity === 'act' && flagFindsFault(f, fault));
      if (flag) found = { panel: run.scenario.name, assessor: fault.assessor!, sizePoints: fault.size!, stepSession: fault.firstSession, sessionsToAct: n - fault.fromSession - 1, message: flag.message };
    }
    out.push(found ?? { panel: run.scenario.name, assessor: fault.assessor!, sizePoints: fault.size!, stepSession: fault.firstSession, sessionsToAct: null, message: null });
  }
  return out;
}

const pct = (x: number) => `${(100 * x).toFixed(0)} %`;

/** A paragraph on the run with period-model fits (the product:session LRT) included. */
export function periodFitParagraph(report: SimulationReport, windowSessions: number): string {
  const unstable = report.byKind.find((t) => t.kind === 'unstable-product')!;
  const spurious = report.stableProductActFlags.map(({ flag }) => `${flag.product ?? 'any product'} on ${flag.attribute ?? 'every attribute'}`);
  return (
    `With period-model fits on consecutive ${windowSessions}-session windows (product:session boundary LRT; ` +
    `${report.panels.map((p) => p.name).join(', ')}; ${(report.elapsedMs / 1000).toFixed(0)} s): planted unstable products found ` +
    `${unstable.found} of ${unstable.planted}; act-level unstable-product flags that match no planted step: ${report.stableProductActFlags.length}` +
    `${spurious.length ? ` (${spurious.join('; ')})` : ''}; act-level flags on clean assessors: ${report.cleanActFlags.length}.`
  );
}

/** Each goal with met / missed, from the numbers below it. */
export function goalsLine(report: SimulationReport): string {
  const mark = (ok: boolean) => (ok ? 'met' : '**missed**');
  const worstFound = Math.min(...report.byKind.filter((t) => t.planted > 0).map((t) => t.found / t.planted));
  const watchPerYear = report.families.map((f) => (f.cleanAssessorYears ? f.cleanWatch / f.cleanAssessorYears : 0));
  const drifter = report.families.find((f) => f.family === 'one-drifter');
  // The broad panels share the one-drifter panels' clean model: the fair base rate.
  const others = report.families.filter((f) => f.family === 'broad');
  const baseDrift = others.reduce((n, f) => n + f.cleanDrift.length, 0) / Math.max(1e-9, others.reduce((n, f) => n + f.cleanAssessorYears, 0));
  const drifterDrift = drifter ? drifter.cleanDrift.length / Math.max(1e-9, drifter.cleanAssessorYears) : 0;
  const swapsPer10 = report.panelYears ? (10 * report.falseSwaps.length) / report.panelYears : 0;
  const steps = report.stepDelays;
  return (
    `Goals: planted faults found ≥ 95 % per kind: ${mark(worstFound >= 0.95)} (lowest ${(100 * worstFound).toFixed(0)} %); ` +
    `act flags ≤ 1 per 10 clean assessor-years: ${mark(report.cleanActPer10AssessorYears <= 1)} (${report.cleanActPer10AssessorYears.toFixed(2)}); ` +
    `watch flags ≤ 2 per clean assessor-year in every family: ${mark(watchPerYear.every((w) => w <= 2))} (highest ${Math.max(...watchPerYear).toFixed(2)}); ` +
    `flags on clean assessors of one-drifter panels within the watch rate: ${mark(!drifter || drifter.cleanWatch / Math.max(1e-9, drifter.cleanAssessorYears) <= 2)}; ` +
    `no echo (drift flags on clean assessors per clean assessor-year, one-drifter vs broad panels): ${mark(drifterDrift <= baseDrift)} (${drifterDrift.toFixed(2)} vs ${baseDrift.toFixed(2)}); ` +
    `false swap alerts ≤ 1 per 10 panel-years: ${mark(swapsPer10 <= 1)} (${swapsPer10.toFixed(2)}); ` +
    `steps flagged at act in their own session: ${mark(steps.length > 0 && steps.every((d) => d.sessionsToAct === 0))} (${steps.filter((d) => d.sessionsToAct === 0).length} of ${steps.length}).`
  );
}

/** The results as a markdown section (for bench/README.md). */
export function reportMarkdown(report: SimulationReport, commit: string): string {
  const lines: string[] = [];
  lines.push('## Flag detection (simulation)');
  lines.push('');
  lines.push(
    'Written by `npx tsx bench/simulation-report.ts`. Simulated panels from the demo generator ' +
      '(`demo/generate-panel.ts`, invented oat-yoghurt range, 0–10 scale, 10 attributes, 5 products per session with the ' +
      'reference in every session, 2 replicates) with every flag kind planted, run through the real pipeline ' +
      '(`fitSessionModel` → `computeAssessorIndices` → import of one CSV per session with quarantine → `buildFlags` with ' +
      '`DEFAULT_THRESHOLDS`). Scenarios and fault sizes: `test/simulation/scenarios.ts`; the same numbers are asserted by ' +
      '`test/simulation/flag-detection.test.ts`.',
  );
  lines.push('');
  lines.push(
    'Planted sizes (0–10 scale): lenient/harsh ±1.5 points on every attribute; drift +0.05 (12-month panels) or +0.1 ' +
      '(6–9-month panels) points per weekly session from mid-period; inconsistent: replicate SD × 2.5; non-discriminating: ' +
      'scaling 0.1; reversed: scaling −1 on 2 attributes; scale-compression 0.45 and scale-expansion 1.9; disagreement: a ' +
      'persistent assessor × product term uncorrelated with the profile, SD equal to the product spread, on 3 attributes; ' +
      'unstable product: +1.5 step on 2 attributes of a recurring product from mid-period; one-session faults (two swapped ' +
      'products, 4 attributes straight-lined, 40 % of cells missing, one negative value, one value × 10, one sample row written ' +
      'twice) on assessors that already carry a model fault, so the clean assessors have none. Clean model: replicate SD 0.45, ' +
      'assessor level within ±0.5, scaling 0.85–1.18, assessor × product SD 0.2 persistent + 0.2 per session, panel shift SD 0.3 ' +
      'per session, product batch SD 0.08, 2 % absences. Period-model fits (product:session LRT) are not part of the suite: at ' +
      'about 5 s per window and attribute they would make it run for hours; unstable products are found here by the step detector.',
  );
  lines.push('');
  lines.push(
    'Broader panels (`broadScenarios()`, families "broad" and "one-drifter"): natural per-attribute assessor offsets SD 0.45 ' +
      '(within ±1.5) that are not faults, assessor × session SD 0.25, product × session SD 0.2, session shift SD 0.35, an assessor ' +
      'day effect SD 0.1 on all attributes, 3 % of ratings missing at random and 3 whole samples missing per panel (a missing-cells ' +
      'flag there is right and not counted), integer ratings on odd seeds, A13 joining at week 20 and A14 leaving after week 35, ' +
      'four holiday sessions with 6 assessors. "one-drifter": A01 drifts +0.05 per week from week 27 (+1.3 by the end), nothing ' +
      'else planted. "broad": two step shifts (±1.5 to 2.5 points on every attribute at one session), a lenient and an ' +
      'inconsistent assessor, three whole-session swaps of two always-served products chosen by the seed.',
  );
  lines.push('');
  lines.push(`Commit ${commit}; ${report.panels.length} panels, ${report.panelYears.toFixed(1)} panel-years, ${(report.elapsedMs / 1000).toFixed(0)} s.`);
  lines.push('');
  lines.push(goalsLine(report));
  lines.push('');
  lines.push('| panel | weeks | assessors | clean | flags |');
  lines.push('| --- | --- | --- | --- | --- |');
  for (const p of report.panels) lines.push(`| ${p.name} | ${p.nWeeks} | ${p.nAssessors} | ${p.nClean} | ${p.nFlags} |`);
  lines.push('');
  lines.push('Planted faults found (goal ≥ 95 % at watch or act):');
  lines.push('');
  lines.push('| kind | planted | found (watch or act) | share | found at act |');
  lines.push('| --- | --- | --- | --- | --- |');
  for (const t of report.byKind) {
    lines.push(`| ${t.kind} | ${t.planted} | ${t.found} | ${t.planted ? pct(t.found / t.planted) : '—'} | ${t.foundAct} |`);
  }
  lines.push('');
  lines.push(
    `Act-level flags on clean assessors: ${report.cleanActFlags.length} in ${report.cleanAssessorYears.toFixed(1)} clean assessor-years = ` +
      `**${report.cleanActPer10AssessorYears.toFixed(2)} per 10 clean assessor-years** (goal ≤ 1). Watch-level flags on clean assessors: ${report.cleanWatchFlagCount} ` +
      `(${(report.cleanAssessorYears > 0 ? (10 * report.cleanWatchFlagCount) / report.cleanAssessorYears : 0).toFixed(1)} per 10 clean assessor-years; by kind: ` +
      `${Object.entries(report.cleanWatchByKind).map(([kind, n]) => `${kind} ${n}`).join(', ') || 'none'}). ` +
      `Act-level unstable-product flags that match no planted step: ${report.stableProductActFlags.length}.`,
  );
  lines.push('');
  lines.push('Flags on clean assessors by panel family (goals: act ≤ 1 per 10 clean assessor-years; watch ≤ 2 per clean assessor-year; in one-drifter panels no more than that):');
  lines.push('');
  lines.push('| family | panels | panel-years | clean assessor-years | act | act per 10 clean assessor-years | watch | watch per clean assessor-year | by kind | drift flags on clean assessors |');
  lines.push('| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |');
  for (const f of report.families) {
    const byKind = Object.entries(f.cleanByKind).map(([kind, n]) => `${kind} ${n}`).join(', ') || 'none';
    lines.push(
      `| ${f.family} | ${f.nPanels} | ${f.panelYears.toFixed(1)} | ${f.cleanAssessorYears.toFixed(1)} | ${f.cleanAct} | ${f.cleanAssessorYears ? ((10 * f.cleanAct) / f.cleanAssessorYears).toFixed(2) : '—'} | ${f.cleanWatch} | ${f.cleanAssessorYears ? (f.cleanWatch / f.cleanAssessorYears).toFixed(2) : '—'} | ${byKind} | ${f.cleanDrift.length} |`,
    );
  }
  lines.push('');
  const echo = report.families.filter((f) => f.family === 'one-drifter').flatMap((f) => f.cleanDrift);
  if (echo.length > 0) {
    lines.push('Drift flags on clean assessors of the one-drifter panels:');
    lines.push('');
    for (const { panel, flag } of echo) lines.push(`- ${panel}: ${flag.severity} ${flag.assessor} ${flag.attribute ?? '(all attributes)'}: ${flag.message}`);
    lines.push('');
  }
  lines.push(
    `Swapped-codes flags matching no planted swap: ${report.falseSwaps.length} in ${report.panelYears.toFixed(1)} panel-years = ` +
      `**${report.panelYears ? ((10 * report.falseSwaps.length) / report.panelYears).toFixed(2) : '—'} per 10 panel-years** (goal ≤ 1).`,
  );
  for (const { panel, flag } of report.falseSwaps) lines.push(`- ${panel}: ${flag.assessor} ${flag.firstSession}: ${flag.message}`);
  lines.push('');
  if (report.stepDelays.length > 0) {
    lines.push('Step shifts: sessions from the step (its own session = 0) to the first act-level flag, the engine re-run after every session (goal 0):');
    lines.push('');
    lines.push('| panel | assessor | step (points) | step session | sessions to act | flag sentence |');
    lines.push('| --- | --- | --- | --- | --- | --- |');
    for (const d of report.stepDelays) lines.push(`| ${d.panel} | ${d.assessor} | ${d.sizePoints} | ${d.stepSession} | ${d.sessionsToAct ?? 'no act flag within 8 sessions'} | ${d.message ?? '—'} |`);
    const zero = report.stepDelays.filter((d) => d.sessionsToAct === 0).length;
    lines.push('');
    lines.push(`Steps flagged at act in their own session: **${zero} of ${report.stepDelays.length}**.`);
    lines.push('');
  }
  lines.push('Drift (linear, from mid-period): sessions from the first drifting session (= 1) to the first drift flag, the engine re-run after every session:');
  lines.push('');
  lines.push('| panel | assessor | drift per session | sessions to first flag | drift flag already before the start |');
  lines.push('| --- | --- | --- | --- | --- |');
  for (const d of report.driftDelays) {
    lines.push(`| ${d.panel} | ${d.assessor} | ${d.ratePerSession} | ${d.sessionsToFirstFlag ?? 'not flagged'} | ${d.flaggedBeforeStart ? 'yes' : 'no'} |`);
  }
  lines.push('');
  lines.push(`Median sessions from drift start to first flag: **${report.medianDriftDelaySessions ?? 'n/a (a drift was never flagged)'}**.`);
  const missed = report.byKind.flatMap((t) => t.missed);
  if (missed.length > 0) {
    lines.push('');
    lines.push('Missed planted faults:');
    lines.push('');
    for (const m of missed) lines.push(`- ${m}`);
  }
  if (report.cleanActFlags.length > 0) {
    lines.push('');
    lines.push('Act-level flags on clean assessors:');
    lines.push('');
    for (const { panel, flag } of report.cleanActFlags) lines.push(`- ${panel}: ${flag.kind} ${flag.assessor} ${flag.attribute ?? '(all attributes)'} from ${flag.firstSession}: ${flag.message}`);
  }
  lines.push('');
  return lines.join('\n');
}
