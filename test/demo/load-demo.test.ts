import { Writable } from 'node:stream';
import { describe, expect, it } from 'vitest';
import type { Rating } from '../../domain/ratings.js';
import { demoFileName, demoPanel, loadDemoPanel } from '../../demo/load-demo.js';
import { openStore } from '../../store/open-store.js';
import { exportRatings } from '../../store/export-ratings.js';
import { listQuarantined } from '../../store/quarantine.js';
import { readPanelSummaries } from '../../store/read-panels.js';

async function exportJson(db: ReturnType<typeof openStore>, panel: string): Promise<Rating[]> {
  const chunks: Buffer[] = [];
  const out = new Writable({
    write(chunk, _encoding, callback) {
      chunks.push(Buffer.from(chunk));
      callback();
    },
  });
  await exportRatings(db, { panel, format: 'json' }, out);
  return JSON.parse(Buffer.concat(chunks).toString('utf8')) as Rating[];
}

const sortKey = (r: Rating) => `${r.session}|${r.attribute}|${r.assessor}|${r.product}|${r.replicate}`;

describe('loadDemoPanel', () => {
  it('imports one file per session through the importer, quarantining only the planted bad cell', async () => {
    const db = openStore(':memory:');
    try {
      const panel = demoPanel();
      const reports = await loadDemoPanel(db);
      expect(reports).toHaveLength(panel.sessions.length);
      expect(reports.map((r) => r.fileName)).toEqual(panel.sessions.map(demoFileName));
      expect(reports.every((r) => r.ok)).toBe(true);

      const decimal = panel.truth.find((f) => f.kind === 'decimal-shift')!;
      const quarantined = reports.filter((r) => r.outcome === 'quarantined');
      expect(quarantined.map((r) => r.fileName)).toEqual([demoFileName(panel.sessions[decimal.fromSession])]);
      expect(reports.filter((r) => r.outcome === 'imported')).toHaveLength(panel.sessions.length - 1);

      const held = listQuarantined(db, panel.panelName);
      expect(held).toHaveLength(1);
      const cell = decimal.cells[0];
      expect(held[0]).toMatchObject({ session: cell.session, assessor: cell.assessor, product: cell.product, attribute: cell.attribute, reasonCode: 'decimal-shift' });
      expect(Number(held[0].rawValue)).toBeCloseTo(cell.fileValue!, 9);

      // The store holds exactly the generator's valid ratings.
      const stored = await exportJson(db, panel.panelName);
      expect(stored.length).toBe(panel.ratings.length);
      expect([...stored].sort((a, b) => sortKey(a).localeCompare(sortKey(b)))).toEqual(
        [...panel.ratings].sort((a, b) => sortKey(a).localeCompare(sortKey(b))),
      );
      expect(readPanelSummaries(db).map((p) => p.name)).toEqual([panel.panelName]);

      // A store that already has a panel is left alone.
      expect(await loadDemoPanel(db)).toEqual([]);
    } finally {
      db.close();
    }
  }, 120_000);
});
