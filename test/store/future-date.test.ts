/** The import passes its clock's today to the reader: a date decades ahead is stored, with a finding. */
import { describe, expect, it } from 'vitest';
import { importRatings } from '../../store/import-ratings.js';
import { openStore } from '../../store/open-store.js';

describe('future session dates', () => {
  it('are imported with a future-date finding in the report', async () => {
    const db = openStore(':memory:');
    try {
      const text = 'session,date,assessor,product,replicate,attribute,value\nS1,2026-11-30,A01,P1,1,sweet,4\nS2,2086-01-05,A01,P1,1,sweet,5\n';
      const report = await importRatings(db, {
        panel: 'oat',
        fileName: 'w.csv',
        source: 'cli',
        input: { bytes: Buffer.from(text) },
        scale: { min: 0, max: 10 },
        quarantine: false,
        now: () => new Date('2026-12-04T09:00:00Z'),
      });
      expect(report.ok).toBe(true);
      expect(report.counts.ratings).toBe(2);
      expect(report.findings).toEqual([expect.objectContaining({ code: 'future-date', row: 3, column: 'date', session: 'S2', file: 'w.csv' })]);
    } finally {
      db.close();
    }
  });
});
