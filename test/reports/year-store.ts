/**
 * A generated year in a store, refitted: 52 weekly sessions, 12 assessors, 10 attributes (demo
 * generator with its planted faults). Written to a file once and reused (the refit takes seconds).
 */
import { createHash } from 'node:crypto';
import { copyFileSync, existsSync, mkdirSync, renameSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { generatePanel, panelSettings, type GeneratedPanel } from '../../demo/generate-panel.js';
import { createFitPool } from '../../server/fit-pool.js';
import { refitPanel } from '../../server/refit.js';
import { importRatingEvents } from '../../store/import-core.js';
import { openStore } from '../../store/open-store.js';

export const YEAR_OPTIONS = { seed: 20260105, nWeeks: 52, nAssessors: 12, startDate: '2026-01-05', faults: 'demo' as const };

export function yearPanel(): GeneratedPanel {
  return generatePanel(YEAR_OPTIONS);
}

/** Path of a refitted year store (built on first use under the temp folder); a private copy when `copyTo` is given. */
export async function yearStorePath(copyTo?: string): Promise<string> {
  const dir = join(tmpdir(), 'panel-steward-report-year');
  const path = join(dir, `year-${YEAR_OPTIONS.seed}-v1.db`);
  if (!existsSync(path)) {
    mkdirSync(dir, { recursive: true });
    const building = `${path}.${process.pid}.tmp`;
    rmSync(building, { force: true });
    const db = openStore(building);
    const panel = yearPanel();
    const sha256 = createHash('sha256').update(JSON.stringify(panel.ratings)).digest('hex');
    await importRatingEvents(
      db,
      { panel: panel.panelName, fileName: 'year.csv', source: 'cli', sha256, quarantine: false, settings: panelSettings(panel) as never },
      panel.ratings.map((rating, i) => ({ type: 'rating' as const, row: i + 2, column: rating.attribute, rating })),
    );
    const runner = createFitPool();
    try {
      await refitPanel(db, panel.panelName, { runner });
    } finally {
      await runner.close();
    }
    db.close();
    renameSync(building, path);
  }
  if (copyTo === undefined) return path;
  copyFileSync(path, copyTo);
  return copyTo;
}
