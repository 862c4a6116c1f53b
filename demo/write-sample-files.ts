/**
 * Writes the example files in sample-data/ (run: `npx tsx demo/write-sample-files.ts`).
 * Two consecutive sessions of a clean 10-assessor panel: the first as a long CSV, the second as
 * a wide XLSX, so that both can be uploaded into the same panel. Deterministic (fixed seed).
 */
import { mkdir, writeFile } from 'node:fs/promises';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import ExcelJS from 'exceljs';
import { generatePanel, panelSettings, sessionSlices, toLongCsv, type GeneratedPanel } from './generate-panel.js';

export const SAMPLE_OPTIONS = {
  seed: 2026,
  nWeeks: 2,
  nAssessors: 10,
  nAttributes: 8,
  nProductsPerSession: 5,
  nReplicates: 2,
  absenceRate: 0,
  startDate: '2026-03-03',
  faults: 'none' as const,
};

export const SAMPLE_FILES = {
  longCsv: 'session-S01-long.csv',
  wideXlsx: 'session-S02-wide.xlsx',
  settings: 'panel-settings.json',
} as const;

/** The wide XLSX of one panel: first sheet "ratings", session date as a real date cell. */
export async function wideXlsxBytes(panel: GeneratedPanel): Promise<Buffer> {
  const workbook = new ExcelJS.Workbook();
  // Fixed metadata so the file does not change with the clock.
  workbook.creator = 'panel-steward demo';
  workbook.created = new Date(Date.UTC(2026, 0, 1));
  workbook.modified = new Date(Date.UTC(2026, 0, 1));
  const sheet = workbook.addWorksheet('ratings');
  sheet.addRow(['session', 'date', 'assessor', 'product', 'replicate', 'code', ...panel.attributes.map((a) => a.name)]);
  for (const row of panel.rawSamples) {
    sheet.addRow([row.session, new Date(`${row.date}T00:00:00Z`), row.assessor, row.product, row.replicate, row.code, ...row.values]);
  }
  sheet.getColumn(2).numFmt = 'yyyy-mm-dd';
  sheet.getRow(1).font = { bold: true };
  return Buffer.from(await workbook.xlsx.writeBuffer());
}

export async function writeSampleFiles(folder: string): Promise<void> {
  const panel = generatePanel(SAMPLE_OPTIONS);
  const [first, second] = sessionSlices(panel);
  await mkdir(folder, { recursive: true });
  await writeFile(join(folder, SAMPLE_FILES.longCsv), toLongCsv(first.panel));
  await writeFile(join(folder, SAMPLE_FILES.wideXlsx), await wideXlsxBytes(second.panel));
  await writeFile(join(folder, SAMPLE_FILES.settings), `${JSON.stringify(panelSettings(panel), null, 2)}\n`);
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  const folder = join(dirname(fileURLToPath(import.meta.url)), '..', 'sample-data');
  await writeSampleFiles(folder);
  console.log(`Wrote ${Object.values(SAMPLE_FILES).join(', ')} to sample-data/.`);
}
