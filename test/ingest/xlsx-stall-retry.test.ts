/**
 * exceljs's streaming reader can hang at random on a valid workbook (upstream exceljs issue
 * #1558); the stall timeout turns a hang into a failure, and the reader tries once more before it
 * calls the file unreadable. These tests drive the retry with scripted record sources.
 */
import { describe, expect, it } from 'vitest';
import type { SourceRecord } from '../../ingest/csv-records.js';
import { SourceFailure } from '../../ingest/source-failure.js';
import { withOneRetryOnStall } from '../../ingest/xlsx-records.js';

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

describe('one retry when the workbook reader stalls', () => {
  it('a stall before the first row: read again, every row once', async () => {
    expect(await collect(withOneRetryOnStall(scripted(4, [{ failAfter: 0, failure: stall }])))).toEqual([1, 2, 3, 4]);
  });

  it('a stall mid-sheet: the rows already handed on are skipped on the second reading', async () => {
    expect(await collect(withOneRetryOnStall(scripted(5, [{ failAfter: 3, failure: stall }])))).toEqual([1, 2, 3, 4, 5]);
  });

  it('a second stall is reported as the unreadable file it probably is', async () => {
    const source = withOneRetryOnStall(scripted(5, [{ failAfter: 2, failure: stall }, { failAfter: 4, failure: stall }]));
    await expect(collect(source)).rejects.toMatchObject({ code: 'file-unreadable' });
  });

  it('a damaged workbook (not a stall) is not read again', async () => {
    let opened = 0;
    const source = withOneRetryOnStall(() => {
      opened += 1;
      return scripted(3, [{ failAfter: 1, failure: () => new SourceFailure('file-unreadable', 'damaged') }])();
    });
    await expect(collect(source)).rejects.toMatchObject({ code: 'file-unreadable', stalled: false });
    expect(opened).toBe(1);
  });

  it('a second reading that disagrees with the first is not trusted', async () => {
    let attempt = 0;
    const source = withOneRetryOnStall(() =>
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
