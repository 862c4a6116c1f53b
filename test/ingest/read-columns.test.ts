/**
 * readRatingColumns (the analyze command's reader: columns, no object per rating) must hold
 * exactly the ratings readRatingBatches reads, in the same order, with the same problems and
 * findings in the same order. Decoded here through the columns' name lists.
 */
import { describe, expect, it } from 'vitest';
import { readRatingColumns } from '../../ingest/read-columns.js';
import { readRatingBatches, type InputSource, type ReadEvent, type ReadRatingsOptions } from '../../ingest/read-ratings.js';
import { fixturePath, SCALE_0_10 } from './helpers.js';

async function viaEvents(source: InputSource, options: ReadRatingsOptions) {
  const ratings: unknown[] = [];
  const others: ReadEvent[] = [];
  for await (const batch of readRatingBatches(source, options)) {
    for (const e of batch) {
      if (e.type === 'rating') {
        const { session, assessor, product, replicate, attribute, value, code } = e.rating;
        ratings.push({ session, assessor, product, replicate, attribute, value, code: code ?? null });
      } else if (e.type === 'problem' || e.type === 'finding') others.push(e);
    }
  }
  return { ratings, problems: others.flatMap((e) => (e.type === 'problem' ? [e.problem] : [])), findings: others.flatMap((e) => (e.type === 'finding' ? [e.finding] : [])) };
}

async function viaColumns(source: InputSource, options: ReadRatingsOptions) {
  const { columns: c, code, codeNames, problems, findings } = await readRatingColumns(source, options);
  const ratings = Array.from({ length: c.n }, (_, i) => ({
    session: c.sessionNames[c.session[i]],
    assessor: c.assessorNames[c.assessor[i]],
    product: c.productNames[c.product[i]],
    replicate: c.replicate[i],
    attribute: c.attributeNames[c.attribute[i]],
    value: c.value[i],
    code: code[i] === 0 ? null : codeNames[code[i]],
  }));
  return { ratings, problems, findings };
}

const options: ReadRatingsOptions = { fileName: 'f.csv', scaleFor: (attribute) => (attribute === 'noscale' ? null : SCALE_0_10), today: '2020-01-01' };
const text = (s: string): InputSource => ({ bytes: new TextEncoder().encode(s) });

describe('readRatingColumns holds what readRatingBatches reads', () => {
  const files = ['long-comma-lf.csv', 'long-semicolon-decimal-comma-crlf.csv', 'validation-long.csv', 'validation-wide.csv', 'wide-comma-lf.csv', 'wide.xlsx', 'wide-bad-cells.xlsx'];
  for (const name of files) {
    it(name, async () => {
      const expected = await viaEvents({ path: fixturePath(name) }, options);
      const got = await viaColumns({ path: fixturePath(name) }, options);
      expect(expected.ratings.length + expected.problems.length).toBeGreaterThan(0);
      expect(got).toEqual(expected);
    });
  }

  it('20,000 ratings (the columns grow twice), sample codes, a bad value, a future date and a file fault at the end', async () => {
    const lines = ['session,date,assessor,product,replicate,attribute,value,code'];
    for (let i = 0; i < 20_000; i++) lines.push(`S${i % 3},2025-01-0${1 + (i % 3)},A${i % 7},P${i % 5},${1 + (i % 2)},att${i % 4},${(i % 100) / 10},${i % 11 === 0 ? '' : `C${i % 13}`}`);
    lines[1500] = 'S0,2025-01-01,A1,P1,1,att1,4..5,C1';
    lines.push('S0,2025-01-01,A1,P1,1,noscale,"unclosed');
    const source = text(lines.join('\n'));
    const expected = await viaEvents(source, options);
    const got = await viaColumns(source, options);
    expect(got.ratings).toHaveLength(19_999);
    expect(got).toEqual(expected);
    expect(got.problems.map((p) => p.code)).toEqual(['not-a-number', 'file-unreadable']);
    expect(got.findings.map((f) => f.code)).toContain('future-date');
  });
});
