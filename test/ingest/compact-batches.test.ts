/**
 * readCompactBatches (the import's reader: no object per rating) must hand over exactly what
 * readRatingBatches reads, in the same order: the same ratings with row and column, the same
 * problems and findings at the same places, the same count of missing cells. Decoded here
 * through the batches' name lists, as the store decodes them.
 */
import { describe, expect, it } from 'vitest';
import {
  F_ASSESSOR,
  F_ATTRIBUTE,
  F_CODE,
  F_COLUMN,
  F_DATE,
  F_PRODUCT,
  F_REPLICATE,
  F_ROW,
  F_SESSION,
  KEY_FIELDS,
  NAME_KINDS,
  readCompactBatches,
  type CompactBatch,
} from '../../ingest/compact-batches.js';
import { readRatingBatches, type InputSource, type ReadEvent, type ReadRatingsOptions } from '../../ingest/read-ratings.js';
import { fixturePath, SCALE_0_10 } from './helpers.js';

type Flat = { kind: 'rating'; row: number; column: string; rating: unknown } | { kind: 'other'; event: ReadEvent };

async function viaEvents(source: InputSource, options: ReadRatingsOptions): Promise<{ flat: Flat[]; nMissing: number }> {
  const flat: Flat[] = [];
  let nMissing = 0;
  for await (const batch of readRatingBatches(source, options)) {
    for (const e of batch) {
      if (e.type === 'rating') flat.push({ kind: 'rating', row: e.row, column: e.column, rating: { ...e.rating, code: e.rating.code ?? null } });
      else if (e.type === 'missing') nMissing++;
      else flat.push({ kind: 'other', event: e });
    }
  }
  return { flat, nMissing };
}

async function viaCompact(source: InputSource, options: ReadRatingsOptions, eventsPerBatch: number): Promise<{ flat: Flat[]; nMissing: number; batches: CompactBatch[] }> {
  const names: string[][] = NAME_KINDS.map(() => ['']);
  const flat: Flat[] = [];
  const batches: CompactBatch[] = [];
  let nMissing = 0;
  for await (const batch of readCompactBatches(source, options, eventsPerBatch)) {
    batches.push(batch);
    batch.newNames.forEach((fresh, kind) => names[kind].push(...fresh));
    const [sessions, attributes, assessors, products, columns, codes, dates] = names;
    let other = 0;
    for (let r = 0; r <= batch.nRatings; r++) {
      while (other < batch.others.length && batch.others[other].at === r) flat.push({ kind: 'other', event: batch.others[other++].event });
      if (r === batch.nRatings) break;
      const k = batch.keys.subarray(r * KEY_FIELDS, (r + 1) * KEY_FIELDS);
      flat.push({
        kind: 'rating',
        row: k[F_ROW],
        column: columns[k[F_COLUMN]],
        rating: {
          session: sessions[k[F_SESSION]],
          assessor: assessors[k[F_ASSESSOR]],
          product: products[k[F_PRODUCT]],
          replicate: k[F_REPLICATE],
          attribute: attributes[k[F_ATTRIBUTE]],
          value: batch.values[r],
          date: dates[k[F_DATE]],
          code: k[F_CODE] === 0 ? null : codes[k[F_CODE]],
        },
      });
    }
    expect(other).toBe(batch.others.length);
    nMissing += batch.nMissing;
  }
  return { flat, nMissing, batches };
}

const options: ReadRatingsOptions = { fileName: 'f.csv', scaleFor: (attribute) => (attribute === 'noscale' ? null : SCALE_0_10) };
const text = (s: string): InputSource => ({ bytes: new TextEncoder().encode(s) });

describe('readCompactBatches gives the events of readRatingBatches', () => {
  const files = ['long-comma-lf.csv', 'long-semicolon-decimal-comma-crlf.csv', 'validation-long.csv', 'validation-wide.csv', 'wide-comma-lf.csv', 'wide.xlsx', 'wide-bad-cells.xlsx'];
  for (const name of files) {
    it(`${name}, in batches of 7 events`, async () => {
      const expected = await viaEvents({ path: fixturePath(name) }, options);
      const got = await viaCompact({ path: fixturePath(name) }, options, 7);
      expect(expected.flat.length).toBeGreaterThan(0);
      expect(got.flat).toEqual(expected.flat);
      expect(got.nMissing).toBe(expected.nMissing);
    });
  }

  it('a file of 3,000 ratings in one batch (the arrays grow), with a bad value and a file fault at the end', async () => {
    const lines = ['session,date,assessor,product,replicate,attribute,value'];
    for (let i = 0; i < 3000; i++) lines.push(`S${i % 3},2025-01-0${1 + (i % 3)},A${i % 7},P${i % 5},${1 + (i % 2)},att${i % 4},${(i % 100) / 10}`);
    lines[1500] = 'S0,2025-01-01,A1,P1,1,att1,4..5';
    lines.push('S0,2025-01-01,A1,P1,1,noscale,"unclosed');
    const source = text(lines.join('\n'));
    const expected = await viaEvents(source, options);
    const got = await viaCompact(source, options, 10_000);
    expect(got.batches).toHaveLength(1);
    expect(got.batches[0].nRatings).toBe(2999);
    expect(got.batches[0].keys.length).toBe(2999 * KEY_FIELDS);
    expect(got.flat).toEqual(expected.flat);
    expect(expected.flat.filter((f) => f.kind === 'other').map((f) => (f.event as Extract<ReadEvent, { type: 'problem' }>).problem.code)).toEqual([
      'not-a-number',
      'file-unreadable',
    ]);
  });

  it('a binary file: one batch with the one problem', async () => {
    const got = await viaCompact(text('%PDF-1.4 garbage'), options, 100);
    expect(got.batches).toHaveLength(1);
    expect(got.flat).toEqual((await viaEvents(text('%PDF-1.4 garbage'), options)).flat);
  });
});
