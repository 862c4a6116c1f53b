/**
 * Loads the demo panel into an empty store through the same import path people use: one long CSV
 * file per weekly session, imported with `importRatings`, so the imports page looks like real use.
 * The session with the planted invalid cell is imported with quarantine on (its valid rows are
 * stored, the bad cell is held for correction), every other session all-or-nothing.
 */
import type { Database } from 'better-sqlite3';
import { importRatings } from '../store/import-ratings.js';
import type { ImportReport } from '../store/import-core.js';
import { readPanelSummaries } from '../store/read-panels.js';
import {
  generatePanel,
  panelSettings,
  sessionSlices,
  toLongCsv,
  type GeneratedPanel,
  type PanelScenarioOptions,
} from './generate-panel.js';

/**
 * The demo: 40 weekly sessions from 2025-09-01 to 2026-06-01 (about nine months, fixed dates so the
 * demo is the same on every machine and no session lies in the future), 12 assessors, 5 products
 * per session, 2 replicates, 10 attributes.
 */
export const DEMO_OPTIONS: PanelScenarioOptions = {
  seed: 20250901,
  nWeeks: 40,
  nAssessors: 12,
  startDate: '2025-09-01',
  faults: 'demo',
};

/** The demo panel itself (pure; also what the load writes). */
export function demoPanel(options: Partial<PanelScenarioOptions> = {}): GeneratedPanel {
  return generatePanel({ ...DEMO_OPTIONS, ...options });
}

/** File name a person would give a weekly export, e.g. `oat-yoghurt-S07-2025-10-13.csv`. */
export function demoFileName(session: { label: string; date: string }): string {
  return `oat-yoghurt-${session.label}-${session.date}.csv`;
}

/**
 * Imports the demo panel when the store holds no panel yet; returns one report per session file
 * (an empty list when the store already has data, which is left untouched).
 */
export async function loadDemoPanel(db: Database, options: Partial<PanelScenarioOptions> = {}): Promise<ImportReport[]> {
  if (readPanelSummaries(db).length > 0) return [];
  const panel = demoPanel(options);
  const settings = panelSettings(panel);
  const invalidSessions = new Set(
    panel.truth.filter((f) => f.kind === 'out-of-scale' || f.kind === 'decimal-shift').map((f) => f.firstSession),
  );
  const reports: ImportReport[] = [];
  for (const { session, panel: slice } of sessionSlices(panel)) {
    const report = await importRatings(db, {
      panel: panel.panelName,
      fileName: demoFileName(session),
      source: 'cli',
      input: { bytes: Buffer.from(toLongCsv(slice), 'utf8') },
      quarantine: invalidSessions.has(session.label),
      // The settings (scale, anchors, reference product) are given with the first file, as a
      // person setting up a new panel would.
      ...(reports.length === 0 ? { settings } : {}),
    });
    if (!report.ok) {
      throw new Error(`The demo session ${session.label} could not be imported: ${report.message}`);
    }
    reports.push(report);
  }
  return reports;
}
