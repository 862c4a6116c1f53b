/**
 * exceljs's streaming reader can hang at random on a valid workbook (upstream exceljs issue
 * #1558), and about one reading in a few hundred throws from inside the library; the stall
 * timeout turns a hang into a failure, and the reader tries once more after either before it
 * calls the file unreadable. These tests drive the retry with scripted record sources, and
 * check that exceljs's own exceptions are marked for a second reading.
 */
import { describe, expect, it } from 'vitest';
import type { SourceRecord } from '../../ingest/csv-records.js';
import { SourceFailure } from '../../ingest/source-failure.js';
import { Readable } from 'node:stream';
import { readXlsxRecords, withOneRetryOnTransientFailure } from '../../ingest/xlsx-records.js';
import { readAll } from './helpers.js';

const batch = (row: number): SourceRecord[] => [{ row, cells: [`r${row}`] }];
const stall = () => new SourceFailure('file-unreadable', 'stalled', null, null, true);

/** A source of rows 1..n that fails with `failure` after `failAfter` batches on the listed attempts. */
function scripted(n: number, plan: { failAfter: number; failure: () => Error }[]) {
  let attempt = 0;
  return () => {
    const step = plan[attempt++];
    return (async function* () {
      for (let row = 1; row <= n; row++) {
        if (step && row - 1 === step.failAfter) throw step.failure();
        yield batch(row);
      }
    })();
  };
}

async function collect(source: AsyncGenerator<SourceRecord[]>): Promise<number[]> {
  const rows: number[] = [];
  for await (const b of source) rows.push(b[0].row);
  return rows;
}

describe('one retry when the workbook reader stalls or throws from inside exceljs', () => {
  it('a stall before the first row: read again, every row once', async () => {
    expect(await collect(withOneRetryOnTransientFailure(scripted(4, [{ failAfter: 0, failure: stall }])))).toEqual([1, 2, 3, 4]);
  });

  it('a stall mid-sheet: the rows already handed on are skipped on the second reading', async () => {
    expect(await collect(withOneRetryOnTransientFailure(scripted(5, [{ failAfter: 3, failure: stall }])))).toEqual([1, 2, 3, 4, 5]);
  });

  it('a second stall is reported as the unreadable file it probably is', async () => {
    const source = withOneRetryOnTransientFailure(scripted(5, [{ failAfter: 2, failure: stall }, { failAfter: 4, failure: stall }]));
    await expect(collect(source)).rejects.toMatchObject({ code: 'file-unreadable' });
  });

  it('an exception from inside the workbook library mid-sheet: read again, every row once', async () => {
    const libraryThrew = () => new SourceFailure('file-unreadable', 'exceljs threw', null, null, true);
    expect(await collect(withOneRetryOnTransientFailure(scripted(5, [{ failAfter: 2, failure: libraryThrew }])))).toEqual([1, 2, 3, 4, 5]);
  });

  it("exceljs's own exceptions are marked transient, so they get the second reading", async () => {
    // Not a zip archive: exceljs throws from inside its unzip stage.
    const notAZip = Readable.from([Buffer.from('PK\u0003\u0004 this is not really a zip archive at all '.repeat(40))]);
    const failure = await collect(readXlsxRecords(notAZip, { stallTimeoutMs: 5000 })).then(
      () => null,
      (error: unknown) => error,
    );
    expect(failure).toBeInstanceOf(SourceFailure);
    expect(failure).toMatchObject({ code: 'file-unreadable', transient: true });
  });

  it('a failure our own checks found (not transient) is not read again', async () => {
    let opened = 0;
    const source = withOneRetryOnTransientFailure(() => {
      opened += 1;
      return scripted(3, [{ failAfter: 1, failure: () => new SourceFailure('file-unreadable', 'damaged') }])();
    });
    await expect(collect(source)).rejects.toMatchObject({ code: 'file-unreadable', transient: false });
    expect(opened).toBe(1);
  });

  it('a second reading that disagrees with the first is not trusted', async () => {
    let attempt = 0;
    const source = withOneRetryOnTransientFailure(() =>
      (async function* () {
        attempt += 1;
        yield batch(attempt === 1 ? 1 : 2);
        if (attempt === 1) throw stall();
        yield batch(3);
      })(),
    );
    await expect(collect(source)).rejects.toMatchObject({ code: 'file-unreadable' });
  });
});

describe('a valid workbook read many times', () => {
  it('is never called unreadable and always gives the same ratings (800 readings)', async () => {
    // Before the retry covered exceljs's own exceptions, about 1 reading in 750 of this file
    // failed (4 in 3,000 measured), so this fails about 2 times in 3 without it.
    const { default: ExcelJS } = await import('exceljs');
    const workbook = new ExcelJS.Workbook();
    const sheet = workbook.addWorksheet('Ratings');
    sheet.addRow(['session', 'date', 'assessor', 'product', 'replicate', 'code', 'sweet', 'sour']);
    for (let i = 0; i < 60; i++) sheet.addRow([`S${i % 3}`, `2026-01-0${1 + (i % 3)}`, `A${i % 7}`, `P${i}`, 1 + (i % 2), `c${i}`, (i % 10) + 0.5, 3.25]);
    const bytes = new Uint8Array(await workbook.xlsx.writeBuffer());
    const first = await readAll({ bytes }, { fileName: 'many.xlsx' });
    expect(first.problems).toEqual([]);
    expect(first.ratings).toHaveLength(120);
    const expected = JSON.stringify(first.ratings);
    let unreadable = 0;
    let different = 0;
    for (let i = 0; i < 800; i++) {
      const r = await readAll({ bytes }, { fileName: 'many.xlsx' });
      if (r.problems.length > 0) unreadable += 1;
      else if (JSON.stringify(r.ratings) !== expected) different += 1;
    }
    expect({ unreadable, different }).toEqual({ unreadable: 0, different: 0 });
  }, 120_000);
});
