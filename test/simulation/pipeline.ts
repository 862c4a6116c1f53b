/**
 * The real analysis pipeline run on a generated panel, without the service:
 * per session × attribute `fitSessionModel` → `computeAssessorIndices` (with the panel product
 * test p), the import findings from the same importer people use (into a throw-away in-memory
 * store, one long CSV per session, quarantine on), and the `PanelHistory` the flag engine reads.
 */
import type { Observation, Rating } from '../../domain/ratings.js';
import { computeAssessorIndices } from '../../analysis/indices/index.js';
import { fitSessionModel } from '../../analysis/lmm/fit-session-model.js';
import { fitPeriodModel } from '../../analysis/lmm/fit-period-model.js';
import type { ImportFinding, PanelHistory, PeriodFitSummary, SessionAttributeResult } from '../../analysis/monitor/series.js';
import { generatePanel, panelSettings, sessionSlices, toLongCsv, type GeneratedPanel } from '../../demo/generate-panel.js';
import { openStore } from '../../store/open-store.js';
import { importRatings } from '../../store/import-ratings.js';
import { listQuarantined } from '../../store/quarantine.js';
import type { SimulationScenario } from './scenarios.js';

export interface PanelRun {
  scenario: SimulationScenario;
  panel: GeneratedPanel;
  /** Every session × attribute that could be fitted, in session order. */
  results: SessionAttributeResult[];
  /** Session × attribute groups the model refused (constant attribute, too few assessors, …). */
  unfitted: { session: string; attribute: string; reason: string }[];
  importFindings: ImportFinding[];
  periodFits: PeriodFitSummary[];
}

function groupBySessionAttribute(ratings: readonly Rating[]): Map<string, Observation[]> {
  const groups = new Map<string, Observation[]>();
  for (const r of ratings) {
    const key = `${r.session}\u0000${r.attribute}`;
    let list = groups.get(key);
    if (!list) groups.set(key, (list = []));
    list.push({ session: r.session, assessor: r.assessor, product: r.product, replicate: r.replicate, attribute: r.attribute, value: r.value });
  }
  return groups;
}

/** Fits and indices of every session × attribute. */
export function fitSessions(panel: GeneratedPanel): Pick<PanelRun, 'results' | 'unfitted'> {
  const scaleOf = new Map(panel.attributes.map((a) => [a.name, a]));
  const dateOf = new Map(panel.sessions.map((s) => [s.label, s.date]));
  const results: SessionAttributeResult[] = [];
  const unfitted: PanelRun['unfitted'] = [];
  for (const [key, observations] of groupBySessionAttribute(panel.ratings)) {
    const [session, attribute] = key.split('\u0000');
    let fit;
    try {
      fit = fitSessionModel(observations);
    } catch (error) {
      unfitted.push({ session, attribute, reason: error instanceof Error ? error.message : String(error) });
      continue;
    }
    const productTestP = fit.json.productTest.p;
    const scale = scaleOf.get(attribute)!;
    results.push({
      session,
      date: dateOf.get(session)!,
      attribute,
      scaleMin: scale.scaleMin,
      scaleMax: scale.scaleMax,
      fit: fit.json,
      indices: computeAssessorIndices(observations, { panelProductPValue: productTestP }),
      productTestP,
    });
  }
  return { results, unfitted };
}

/**
 * The period model with its product:session LRT on consecutive (non-overlapping) windows of
 * `windowSessions` sessions, per attribute. (The service fits every rolling window; that is too
 * slow for a suite of several simulated years, so the harness uses the non-overlapping ones.)
 */
export function fitPeriods(panel: GeneratedPanel, windowSessions: number): PeriodFitSummary[] {
  const out: PeriodFitSummary[] = [];
  const labels = panel.sessions.map((s) => s.label);
  for (let end = windowSessions; end <= labels.length; end += windowSessions) {
    const window = new Set(labels.slice(end - windowSessions, end));
    for (const attribute of panel.attributes) {
      const observations = panel.ratings.filter((r) => r.attribute === attribute.name && window.has(r.session));
      try {
        const fit = fitPeriodModel(observations);
        out.push({
          attribute: attribute.name,
          sessions: [...window],
          productSessionVariance: fit.json.variance['product:session'] ?? 0,
          lrt: fit.productSessionLrt,
        });
      } catch {
        // A window the model refuses is left out, as the service leaves it unfitted.
      }
    }
  }
  return out;
}

/**
 * Imports the panel one session file at a time, as a person would, into an in-memory store with
 * quarantine on, and returns what the flag engine reads from imports: the findings of each
 * import (duplicates, …) and the quarantined cells (out-of-scale, decimal shift) as findings.
 */
export async function importFindingsOf(panel: GeneratedPanel): Promise<ImportFinding[]> {
  const db = openStore(':memory:');
  try {
    const findings: ImportFinding[] = [];
    let first = true;
    for (const { session, panel: slice } of sessionSlices(panel)) {
      const fileName = `${session.label}.csv`;
      const report = await importRatings(db, {
        panel: panel.panelName,
        fileName,
        source: 'cli',
        input: { bytes: Buffer.from(toLongCsv(slice), 'utf8') },
        quarantine: true,
        ...(first ? { settings: panelSettings(panel) } : {}),
      });
      first = false;
      if (!report.ok) throw new Error(`Simulated session ${session.label} was not imported: ${report.message}`);
      findings.push(...report.findings);
    }
    for (const cell of listQuarantined(db, panel.panelName)) {
      findings.push({
        code: cell.reasonCode as ImportFinding['code'],
        file: cell.fileName,
        row: cell.rowNumber,
        column: cell.columnName,
        message: cell.reason,
        session: cell.session,
        assessor: cell.assessor,
        product: cell.product,
        attribute: cell.attribute,
      });
    }
    return findings;
  } finally {
    db.close();
  }
}

export async function runPanel(scenario: SimulationScenario, options: { periodWindowSessions?: number } = {}): Promise<PanelRun> {
  const panel = generatePanel(scenario.options);
  const { results, unfitted } = fitSessions(panel);
  const importFindings = await importFindingsOf(panel);
  const periodFits = options.periodWindowSessions ? fitPeriods(panel, options.periodWindowSessions) : [];
  return { scenario, panel, results, unfitted, importFindings, periodFits };
}

/** The history as the flag engine would see it after the first `nSessions` sessions. */
export function historyUpTo(run: PanelRun, nSessions: number = run.panel.sessions.length): PanelHistory {
  const sessions = run.panel.sessions.slice(0, nSessions).map((s) => ({ label: s.label, date: s.date }));
  const included = new Set(sessions.map((s) => s.label));
  return {
    sessions,
    attributes: run.panel.attributes.map((a) => ({ name: a.name, scaleMin: a.scaleMin, scaleMax: a.scaleMax })),
    referenceProducts: run.panel.products.filter((p) => p.role === 'reference').map((p) => p.code),
    results: run.results.filter((r) => included.has(r.session)),
    ratings: run.panel.ratings.filter((r) => included.has(r.session)),
    importFindings: run.importFindings.filter((f) => f.session === null || f.session === undefined || included.has(f.session)),
    events: [],
    periodFits: run.periodFits.filter((p) => p.sessions.every((s) => included.has(s))),
  };
}
