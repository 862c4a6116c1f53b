/**
 * A minimal long-form reader for store tests that must not depend on the ingest reader
 * (clean files only: header session,date,assessor,product,replicate,attribute,value[,code]).
 */
import type { ImportEvent } from '../../store/import-core.js';

export function* readLongCsvText(text: string, fileName = 'test.csv'): Generator<ImportEvent> {
  const lines = text.split(/\r?\n/).filter((line) => line.length > 0);
  const header = lines[0].split(',');
  const at = (name: string): number => header.indexOf(name);
  for (let i = 1; i < lines.length; i++) {
    const cells = lines[i].split(',');
    const row = i + 1;
    const value = Number(cells[at('value')]);
    if (!Number.isFinite(value)) {
      yield {
        type: 'problem',
        problem: { code: 'not-a-number', file: fileName, row, column: 'value', message: `Row ${row}: not a number.`, value: cells[at('value')] },
        cell: { session: cells[0], date: cells[1], assessor: cells[2], product: cells[3], replicate: cells[4], attribute: cells[5], rawValue: cells[6], code: null },
      };
      continue;
    }
    yield {
      type: 'rating',
      row,
      column: 'value',
      rating: {
        session: cells[at('session')],
        date: cells[at('date')],
        assessor: cells[at('assessor')],
        product: cells[at('product')],
        replicate: Number(cells[at('replicate')]),
        attribute: cells[at('attribute')],
        value,
        code: at('code') >= 0 && cells[at('code')] ? cells[at('code')] : null,
      },
    };
  }
}
