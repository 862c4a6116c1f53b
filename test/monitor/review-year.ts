/**
 * A year of generated data for the review pages (browser tests and bench/review-pages-bench.ts):
 * 52 weekly sessions, 12 assessors, 10 attributes, with a lenient assessor, a slow drift, a wide
 * replicate spread, swapped codes, a decimal-shift typo and a value outside the scale (held), imported one file per session as
 * people do; plus a 53rd week in which one assessor rates 2.5 points higher on every attribute.
 */
import type { Database } from 'better-sqlite3';
import { generatePanel, panelSettings, sessionSlices, toLongCsv, type GeneratedPanel } from '../../demo/generate-panel.js';
import { importRatings } from '../../store/import-ratings.js';

export const YEAR_SESSIONS = 52;
export const SHIFTED_ASSESSOR = 'A04';
export const SHIFT_POINTS = 2.5;

export function reviewYear(seed = 4242): GeneratedPanel {
  const base = generatePanel({ seed, nWeeks: YEAR_SESSIONS + 1, nAssessors: 12, nAttributes: 10, startDate: '2025-12-01', faults: 'none', panelName: 'Year panel' });
  return generatePanel({
    seed,
    nWeeks: YEAR_SESSIONS + 1,
    nAssessors: 12,
    nAttributes: 10,
    startDate: '2025-12-01',
    panelName: 'Year panel',
    faults: [
      { kind: 'lenient', assessor: 'A03', size: 1.3 },
      { kind: 'drift', assessor: 'A07', fromSession: 26, size: 0.08 },
      { kind: 'inconsistent', assessor: 'A10', size: 2.5 },
      { kind: 'swapped-codes', assessor: 'A05', fromSession: 20, product: 'REF', otherProduct: 'T02' },
      { kind: 'decimal-shift', assessor: 'A02', fromSession: 25, product: 'T03', attributes: [base.attributes[3].name] },
      { kind: 'out-of-scale', assessor: 'A06', fromSession: 40, product: 'T01', attributes: [base.attributes[5].name] },
      { kind: 'lenient', assessor: SHIFTED_ASSESSOR, fromSession: YEAR_SESSIONS, toSession: YEAR_SESSIONS, size: SHIFT_POINTS, attributes: base.attributes.map((a) => a.name) },
    ],
  });
}

/** The CSV file of one session, as a person would upload it. */
export function sessionCsv(panel: GeneratedPanel, index: number): { fileName: string; text: string } {
  const slice = sessionSlices(panel)[index];
  return { fileName: `year-${slice.session.label}-${slice.session.date}.csv`, text: toLongCsv(slice.panel) };
}

/** Imports the first `nSessions` sessions, one file each (with quarantine, so a bad cell is held for correction). */
export async function importYear(db: Database, panel: GeneratedPanel, nSessions = YEAR_SESSIONS): Promise<void> {
  const settings = panelSettings(panel);
  for (let i = 0; i < nSessions; i++) {
    const file = sessionCsv(panel, i);
    const report = await importRatings(db, {
      panel: panel.panelName,
      fileName: file.fileName,
      source: 'cli',
      input: { bytes: Buffer.from(file.text, 'utf8') },
      quarantine: true,
      ...(i === 0 ? { settings } : {}),
    });
    if (!report.ok) throw new Error(`session ${i + 1} could not be imported: ${report.message}`);
  }
}
