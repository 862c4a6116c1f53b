import { readFile } from 'node:fs/promises';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import ExcelJS from 'exceljs';
import { generatePanel, panelSettings, sessionSlices, toLongCsv } from '../../demo/generate-panel.js';
import { SAMPLE_FILES, SAMPLE_OPTIONS } from '../../demo/write-sample-files.js';
import { readRatings } from '../../ingest/read-ratings.js';
import type { Rating } from '../../domain/ratings.js';

const folder = join(import.meta.dirname, '..', '..', 'sample-data');

describe('sample-data files', () => {
  const panel = generatePanel(SAMPLE_OPTIONS);
  const [first, second] = sessionSlices(panel);

  it('the committed long CSV and settings are what the script writes', async () => {
    expect(await readFile(join(folder, SAMPLE_FILES.longCsv), 'utf8')).toBe(toLongCsv(first.panel));
    expect(JSON.parse(await readFile(join(folder, SAMPLE_FILES.settings), 'utf8'))).toEqual(panelSettings(panel));
    // One session, 10 assessors × 5 products × 2 replicates × 8 attributes.
    expect(first.panel.rawRows).toHaveLength(800);
    expect(new Set(first.panel.rawRows.map((r) => r.session))).toEqual(new Set(['S01']));
  });

  it('the committed XLSX holds the second session in wide form on its first sheet', async () => {
    const workbook = new ExcelJS.Workbook();
    await workbook.xlsx.readFile(join(folder, SAMPLE_FILES.wideXlsx));
    const sheet = workbook.worksheets[0];
    const rows: unknown[][] = [];
    sheet.eachRow((row) => rows.push((row.values as unknown[]).slice(1)));
    expect(rows[0]).toEqual(['session', 'date', 'assessor', 'product', 'replicate', 'code', ...panel.attributes.map((a) => a.name)]);
    expect(rows).toHaveLength(1 + 100);
    second.panel.rawSamples.forEach((sample, i) => {
      const row = rows[i + 1];
      expect((row[1] as Date).toISOString().slice(0, 10)).toBe(sample.date);
      expect([row[0], row[2], row[3], row[4], row[5], ...row.slice(6)]).toEqual([
        sample.session,
        sample.assessor,
        sample.product,
        sample.replicate,
        sample.code,
        ...sample.values,
      ]);
    });
  });

  it('both files read without a problem into exactly the generated ratings (ingest reader)', async () => {
    for (const [fileName, expected] of [
      [SAMPLE_FILES.longCsv, first.panel.ratings],
      [SAMPLE_FILES.wideXlsx, second.panel.ratings],
    ] as const) {
      const ratings: Rating[] = [];
      const other: string[] = [];
      for await (const event of readRatings({ path: join(folder, fileName) }, { fileName, scaleFor: () => panel.scale })) {
        if (event.type === 'rating') ratings.push(event.rating);
        else other.push(event.type);
      }
      expect(other).toEqual([]);
      expect(ratings).toEqual(expected);
    }
  });
});
