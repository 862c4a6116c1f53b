import { describe, expect, it } from 'vitest';
import { parse } from 'csv-parse/sync';
import type { Rating } from '../../domain/ratings.js';
import { FLAG_KINDS } from '../../domain/flags.js';
import {
  generatePanel,
  toLongCsv,
  toWideCsv,
  panelSettings,
  type FaultSpec,
  type GeneratedPanel,
  type PanelScenarioOptions,
} from '../../demo/generate-panel.js';
import { createRandom } from '../../demo/random.js';
import { readRatings } from '../../ingest/read-ratings.js';

const base: Omit<PanelScenarioOptions, 'faults'> = { seed: 11, nWeeks: 40, nAssessors: 12, startDate: '2026-01-05' };

function keyOf(r: Pick<Rating, 'session' | 'assessor' | 'product' | 'replicate' | 'attribute'>): string {
  return `${r.session}|${r.assessor}|${r.product}|${r.replicate}|${r.attribute}`;
}

function byKey(ratings: Rating[]): Map<string, number> {
  return new Map(ratings.map((r) => [keyOf(r), r.value]));
}

function mean(xs: number[]): number {
  return xs.reduce((s, x) => s + x, 0) / xs.length;
}

/** Cell means m_ap per session/attribute, and the assessor's offset m_a· − mean of the others' m_·p. */
function cellMeans(ratings: Rating[]): Map<string, Map<string, Map<string, number>>> {
  // key session|attribute -> assessor -> product -> mean
  const sums = new Map<string, Map<string, Map<string, [number, number]>>>();
  for (const r of ratings) {
    const sa = `${r.session}|${r.attribute}`;
    if (!sums.has(sa)) sums.set(sa, new Map());
    const byAssessor = sums.get(sa)!;
    if (!byAssessor.has(r.assessor)) byAssessor.set(r.assessor, new Map());
    const byProduct = byAssessor.get(r.assessor)!;
    const cell = byProduct.get(r.product) ?? [0, 0];
    byProduct.set(r.product, [cell[0] + r.value, cell[1] + 1]);
  }
  const out = new Map<string, Map<string, Map<string, number>>>();
  for (const [sa, byAssessor] of sums) {
    out.set(sa, new Map([...byAssessor].map(([a, m]) => [a, new Map([...m].map(([p, [s, n]]) => [p, s / n]))])));
  }
  return out;
}

/** Mean over sessions×attributes of the assessor's level offset against the leave-one-out panel. */
function levelOffsets(ratings: Rating[], assessor: string, filter: (sessionAttr: string) => boolean = () => true): number[] {
  const offsets: number[] = [];
  for (const [sa, byAssessor] of cellMeans(ratings)) {
    if (!filter(sa)) continue;
    const own = byAssessor.get(assessor);
    if (!own) continue;
    const diffs: number[] = [];
    for (const [product, value] of own) {
      const others = [...byAssessor].filter(([a, m]) => a !== assessor && m.has(product)).map(([, m]) => m.get(product)!);
      diffs.push(value - mean(others));
    }
    offsets.push(mean(diffs));
  }
  return offsets;
}

/** Least-squares slope of the assessor's centred cell means on the LOO panel's centred means. */
function scalingSlope(ratings: Rating[], assessor: string, attributes: string[]): number {
  let sxy = 0;
  let sxx = 0;
  for (const [sa, byAssessor] of cellMeans(ratings)) {
    if (!attributes.includes(sa.split('|')[1])) continue;
    const own = byAssessor.get(assessor);
    if (!own) continue;
    const pairs = [...own].map(([product, y]) => {
      const others = [...byAssessor].filter(([a]) => a !== assessor).map(([, m]) => m.get(product)!);
      return [mean(others), y] as const;
    });
    const mx = mean(pairs.map((p) => p[0]));
    const my = mean(pairs.map((p) => p[1]));
    for (const [x, y] of pairs) {
      sxy += (x - mx) * (y - my);
      sxx += (x - mx) ** 2;
    }
  }
  return sxy / sxx;
}

describe('random source', () => {
  it('gives standard normals with mean ≈ 0 and SD ≈ 1 (Box–Muller)', () => {
    const rng = createRandom(7);
    const xs = Array.from({ length: 200_000 }, () => rng.normal());
    const m = mean(xs);
    const sd = Math.sqrt(mean(xs.map((x) => (x - m) ** 2)));
    // SE of the mean is 1/√200000 ≈ 0.0022; of the SD ≈ 0.0016.
    expect(Math.abs(m)).toBeLessThan(0.01);
    expect(Math.abs(sd - 1)).toBeLessThan(0.01);
    // Share beyond ±1.96 ≈ 5 % (normal table, common knowledge).
    expect(xs.filter((x) => Math.abs(x) > 1.959964).length / xs.length).toBeCloseTo(0.05, 2);
  });
});

describe('generatePanel', () => {
  it('is deterministic per seed and differs between seeds', () => {
    const a = generatePanel({ ...base, faults: 'demo' });
    const b = generatePanel({ ...base, faults: 'demo' });
    const c = generatePanel({ ...base, seed: 12, faults: 'demo' });
    expect(b).toEqual(a);
    expect(c.ratings.map((r) => r.value)).not.toEqual(a.ratings.map((r) => r.value));
  });

  it('has a realistic design: weekly sessions, the reference in every session, 3-digit blind codes', () => {
    const panel = generatePanel({ ...base, faults: 'none' });
    expect(panel.sessions).toHaveLength(40);
    expect(panel.sessions[1].date).toBe('2026-01-12');
    expect(panel.attributes).toHaveLength(10);
    expect(panel.products.filter((p) => p.role === 'reference').map((p) => p.code)).toEqual(['REF']);
    for (const session of panel.sessions) {
      expect(session.products[0]).toBe('REF');
      expect(session.products).toHaveLength(5);
      expect(session.assessors.length).toBeGreaterThanOrEqual(9);
      // One distinct 3-digit code per served sample (product × replicate).
      const samplesByCode = new Map<string, Set<string>>();
      for (const r of panel.rawRows.filter((x) => x.session === session.label)) {
        if (!samplesByCode.has(r.code!)) samplesByCode.set(r.code!, new Set());
        samplesByCode.get(r.code!)!.add(`${r.product}|${r.replicate}`);
      }
      expect(samplesByCode.size).toBe(5 * 2);
      for (const [code, samples] of samplesByCode) {
        expect(code).toMatch(/^[1-9]\d\d$/);
        expect(samples.size).toBe(1);
      }
    }
    // Recurring and rotating products: T01–T03 every week, T04–T07 once every four weeks.
    expect(panel.sessions.filter((s) => s.products.includes('T05'))).toHaveLength(10);
    // Clean data: every value inside the scale, at 0.1 resolution, no duplicate keys.
    const keys = new Set(panel.ratings.map(keyOf));
    const badValues = panel.ratings.filter((r) => !(r.value >= 0 && r.value <= 10) || Math.abs(r.value * 10 - Math.round(r.value * 10)) > 1e-9);
    expect(badValues).toEqual([]);
    expect(keys.size).toBe(panel.ratings.length);
    expect(panel.rawRows).toEqual(panel.ratings);
    expect(panel.truth).toEqual([]);
  });

  it('plants faults only in the cells they touch (faults draw from their own stream)', () => {
    const clean = byKey(generatePanel({ ...base, faults: 'none' }).ratings);
    const faulty = generatePanel({ ...base, faults: [{ kind: 'swapped-codes', assessor: 'A04', fromSession: 9 }] });
    const changed = new Set(faulty.truth[0].cells.map(keyOf));
    let differing = 0;
    for (const r of faulty.ratings) {
      if (clean.get(keyOf(r)) !== r.value) {
        differing++;
        expect(changed.has(keyOf(r))).toBe(true);
      }
    }
    expect(differing).toBeGreaterThan(20);
  });

  it('lenient and harsh assessors are offset from the panel by about the planted size', () => {
    const faults: FaultSpec[] = [
      { kind: 'lenient', assessor: 'A02', size: 1.5 },
      { kind: 'harsh', assessor: 'A09', size: 1.2 },
    ];
    const clean = generatePanel({ ...base, faults: 'none' }).ratings;
    const faulty = generatePanel({ ...base, faults }).ratings;
    // Planted minus clean offset: exact up to clipping at the scale ends (and the LOO panel
    // changing slightly because the other faulty assessor is in it).
    const lenientGain = mean(levelOffsets(faulty, 'A02')) - mean(levelOffsets(clean, 'A02'));
    const harshGain = mean(levelOffsets(faulty, 'A09')) - mean(levelOffsets(clean, 'A09'));
    expect(lenientGain).toBeGreaterThan(1.5 * 0.85);
    expect(lenientGain).toBeLessThan(1.5 * 1.12);
    expect(harshGain).toBeLessThan(-1.2 * 0.85);
    expect(harshGain).toBeGreaterThan(-1.2 * 1.12);
    // Clean assessors stay within ±5 % of the scale on average.
    for (const a of ['A01', 'A05', 'A11']) expect(Math.abs(mean(levelOffsets(clean, a)))).toBeLessThan(0.5);
  });

  it('drift grows by about the planted rate per weekly session from its start', () => {
    const panel = generatePanel({ ...base, faults: [{ kind: 'drift', assessor: 'A06', fromSession: 20, size: 0.08 }] });
    const fault = panel.truth[0];
    expect(fault.firstSession).toBe('S21');
    const perSession = panel.sessions.map((s) =>
      mean(levelOffsets(panel.ratings, 'A06', (sa) => sa.startsWith(`${s.label}|`))),
    );
    const before = perSession.slice(0, 20);
    const after = perSession.slice(20);
    expect(Math.abs(mean(before))).toBeLessThan(0.5);
    // Least-squares slope over the drifting sessions.
    const xs = after.map((_, i) => i);
    const mx = mean(xs);
    const my = mean(after);
    const slope = xs.reduce((s, x, i) => s + (x - mx) * (after[i] - my), 0) / xs.reduce((s, x) => s + (x - mx) ** 2, 0);
    expect(slope).toBeGreaterThan(0.06);
    expect(slope).toBeLessThan(0.1);
  });

  it('an inconsistent assessor has replicate SD about the planted multiple of the others', () => {
    const panel = generatePanel({ ...base, faults: [{ kind: 'inconsistent', assessor: 'A08', size: 2.5 }] });
    const diffs = new Map<string, number[]>();
    const first = new Map<string, number>();
    for (const r of panel.ratings) {
      const cell = `${r.session}|${r.assessor}|${r.product}|${r.attribute}`;
      if (r.replicate === 1) first.set(cell, r.value);
      else if (first.has(cell)) {
        if (!diffs.has(r.assessor)) diffs.set(r.assessor, []);
        diffs.get(r.assessor)!.push(r.value - first.get(cell)!);
      }
    }
    const sd = (xs: number[]) => Math.sqrt(mean(xs.map((x) => x * x)) / 2);
    const others = [...diffs].filter(([a]) => a !== 'A08').flatMap(([, d]) => d);
    const ratio = sd(diffs.get('A08')!) / sd(others);
    // Below 2.5 because the assessor's noise multiplier is drawn around 1 and clipping
    // at the scale ends trims the largest errors.
    expect(ratio).toBeGreaterThan(2.0);
    expect(ratio).toBeLessThan(2.8);
  });

  it('scale-use faults give about the planted scaling coefficient', () => {
    const all = ['sourness', 'sweetness', 'vanilla flavour', 'thickness', 'creaminess', 'graininess'];
    const panel = generatePanel({
      ...base,
      faults: [
        { kind: 'scale-compression', assessor: 'A01', size: 0.45 },
        { kind: 'scale-expansion', assessor: 'A02', size: 1.9 },
        { kind: 'reversed', assessor: 'A03', attributes: ['sweetness', 'thickness'] },
        { kind: 'non-discriminating', assessor: 'A04', size: 0.1 },
      ],
    });
    expect(scalingSlope(panel.ratings, 'A01', all)).toBeCloseTo(0.45, 0);
    expect(Math.abs(scalingSlope(panel.ratings, 'A01', all) - 0.45)).toBeLessThan(0.12);
    // Expansion is trimmed by clipping at 0 and 10.
    expect(scalingSlope(panel.ratings, 'A02', all)).toBeGreaterThan(1.5);
    expect(scalingSlope(panel.ratings, 'A03', ['sweetness', 'thickness'])).toBeLessThan(-0.7);
    expect(scalingSlope(panel.ratings, 'A03', ['sourness', 'creaminess'])).toBeGreaterThan(0.7);
    expect(Math.abs(scalingSlope(panel.ratings, 'A04', all))).toBeLessThan(0.25);
    expect(scalingSlope(panel.ratings, 'A05', all)).toBeGreaterThan(0.8);
    expect(panel.truth.find((f) => f.kind === 'reversed')!.attributes).toEqual(['sweetness', 'thickness']);
  });

  it('an unstable product steps by about the planted size at its first session', () => {
    const panel = generatePanel({ ...base, faults: [{ kind: 'unstable-product', product: 'T01', attributes: ['sourness'], fromSession: 20 }] });
    const diffFromRef = (sessions: string[]) =>
      mean(
        sessions.map((s) => {
          const rows = panel.ratings.filter((r) => r.session === s && r.attribute === 'sourness');
          return mean(rows.filter((r) => r.product === 'T01').map((r) => r.value)) - mean(rows.filter((r) => r.product === 'REF').map((r) => r.value));
        }),
      );
    const labels = panel.sessions.map((s) => s.label);
    const step = diffFromRef(labels.slice(20)) - diffFromRef(labels.slice(0, 20));
    expect(step).toBeGreaterThan(1.3);
    expect(step).toBeLessThan(1.7);
    expect(panel.truth[0]).toMatchObject({ product: 'T01', assessor: null, firstSession: 'S21' });
  });

  it('disagreement adds product-specific deviations without a level offset', () => {
    const attrs = ['sweetness', 'thickness', 'creaminess'];
    const clean = generatePanel({ ...base, faults: 'none' }).ratings;
    const panel = generatePanel({ ...base, faults: [{ kind: 'disagreement', assessor: 'A07', attributes: attrs, size: 1.2 }] });
    const inAttrs = (sa: string) => attrs.includes(sa.split('|')[1]);
    // Interaction residual SD: the assessor's deviations from the panel per product, after
    // removing their own mean, grow from about 0.45 to well above 1.
    const residualSd = (ratings: Rating[]) => {
      const res: number[] = [];
      for (const [sa, byAssessor] of cellMeans(ratings)) {
        if (!inAttrs(sa)) continue;
        const own = byAssessor.get('A07');
        if (!own) continue;
        const d = [...own].map(([p, y]) => y - mean([...byAssessor].filter(([a]) => a !== 'A07').map(([, m]) => m.get(p)!)));
        const md = mean(d);
        res.push(...d.map((x) => x - md));
      }
      return Math.sqrt(mean(res.map((x) => x * x)));
    };
    expect(residualSd(clean)).toBeLessThan(0.5);
    expect(residualSd(panel.ratings)).toBeGreaterThan(0.9);
    expect(Math.abs(mean(levelOffsets(panel.ratings, 'A07', inAttrs)))).toBeLessThan(0.6);
  });

  it('data-quality faults are in the file rows exactly as recorded', () => {
    const faults: FaultSpec[] = [
      { kind: 'out-of-scale', assessor: 'A01', fromSession: 3, product: 'T02', attributes: ['sweetness'] },
      { kind: 'decimal-shift', assessor: 'A02', fromSession: 4, product: 'T02', attributes: ['sweetness'] },
      { kind: 'duplicate', assessor: 'A03', fromSession: 5, product: 'REF', replicate: 2 },
      { kind: 'missing-cells', assessor: 'A04', fromSession: 6 },
      { kind: 'straight-lining', assessor: 'A05', fromSession: 7 },
      { kind: 'swapped-codes', assessor: 'A06', fromSession: 8, product: 'T02', otherProduct: 'T03', replicate: 1 },
    ];
    const clean = byKey(generatePanel({ ...base, faults: 'none' }).ratings);
    const panel = generatePanel({ ...base, faults });
    const valid = byKey(panel.ratings);
    const [outOfScale, decimal, duplicate, missing, flat, swapped] = panel.truth;

    const oos = outOfScale.cells[0];
    expect(oos.fileValue).toBeLessThan(0);
    expect(panel.rawRows.find((r) => keyOf(r) === keyOf(oos))!.value).toBe(oos.fileValue);
    expect(valid.has(keyOf(oos))).toBe(false);

    const dec = decimal.cells[0];
    expect(dec.fileValue).toBeCloseTo(dec.cleanValue! * 10, 9);
    expect(dec.fileValue).toBeGreaterThan(10);
    expect(valid.has(keyOf(dec))).toBe(false);

    expect(duplicate.cells).toHaveLength(10);
    for (const cell of duplicate.cells) {
      const copies = panel.rawRows.filter((r) => keyOf(r) === keyOf(cell));
      expect(copies).toHaveLength(2);
      expect(copies[0]).toEqual(copies[1]);
      expect(valid.get(keyOf(cell))).toBe(cell.cleanValue);
    }

    // 40 % of the assessor's 5 × 2 × 10 cells in the session are gone.
    expect(missing.cells).toHaveLength(40);
    for (const cell of missing.cells) expect(valid.has(keyOf(cell))).toBe(false);
    expect(panel.ratings.filter((r) => r.assessor === 'A04' && r.session === 'S07')).toHaveLength(60);

    expect(flat.attributes).toHaveLength(4);
    for (const attribute of flat.attributes!) {
      const values = panel.ratings.filter((r) => r.assessor === 'A05' && r.session === 'S08' && r.attribute === attribute).map((r) => r.value);
      expect(values).toHaveLength(10);
      expect(new Set(values).size).toBe(1);
    }

    expect(swapped.cells).toHaveLength(20);
    for (const cell of swapped.cells) {
      const other = cell.product === 'T02' ? 'T03' : 'T02';
      expect(valid.get(keyOf(cell))).toBe(clean.get(keyOf({ ...cell, product: other })));
      expect(cell.replicate).toBe(1);
    }
    // Exactly the planted invalid rows and one duplicate sample are in the file and not valid.
    expect(panel.rawRows.length - panel.ratings.length).toBe(2 + 10);
  });

  it('a decimal shift left to the generator always leaves the scale', () => {
    const faults: FaultSpec[] = Array.from({ length: 30 }, (_, i) => ({ kind: 'decimal-shift', assessor: `A${String((i % 12) + 1).padStart(2, '0')}`, fromSession: i }));
    const panel = generatePanel({ ...base, faults });
    for (const fault of panel.truth) {
      expect(fault.cells).toHaveLength(1);
      expect(fault.cells[0].fileValue).toBeGreaterThan(10);
      expect(fault.attributes).toEqual([fault.cells[0].attribute]);
    }
  });

  it('can plant every flag kind', () => {
    const faults: FaultSpec[] = FLAG_KINDS.map((kind, i) => ({
      kind,
      assessor: kind === 'unstable-product' ? null : `A${String((i % 12) + 1).padStart(2, '0')}`,
    }));
    const panel = generatePanel({ ...base, faults });
    expect(panel.truth.map((f) => f.kind)).toEqual([...FLAG_KINDS]);
    for (const f of panel.truth) expect(f.description.length).toBeGreaterThan(10);
  });

  it('rejects impossible options with a plain message', () => {
    expect(() => generatePanel({ ...base, nAssessors: 2, faults: 'none' })).toThrow(/nAssessors/);
    expect(() => generatePanel({ ...base, startDate: '2026-13-45', faults: 'none' })).toThrow(/startDate/);
    expect(() => generatePanel({ ...base, faults: [{ kind: 'lenient', assessor: 'A99' }] })).toThrow(/not on the panel/);
    expect(() => generatePanel({ ...base, faults: [{ kind: 'duplicate', assessor: 'A01', product: 'T05', fromSession: 0 }] })).toThrow(
      /not served/,
    );
  });
});

function parseCsv(text: string): Record<string, string>[] {
  return parse(text, { columns: true, skip_empty_lines: true }) as Record<string, string>[];
}

function ratingsFromLong(text: string): Rating[] {
  return parseCsv(text).map((row) => ({
    session: row.session,
    date: row.date,
    assessor: row.assessor,
    product: row.product,
    replicate: Number(row.replicate),
    attribute: row.attribute,
    value: Number(row.value),
    code: row.code,
  }));
}

function ratingsFromWide(text: string, panel: GeneratedPanel): Rating[] {
  const out: Rating[] = [];
  for (const row of parseCsv(text)) {
    for (const a of panel.attributes) {
      if (row[a.name] === '') continue;
      out.push({
        session: row.session,
        date: row.date,
        assessor: row.assessor,
        product: row.product,
        replicate: Number(row.replicate),
        attribute: a.name,
        value: Number(row[a.name]),
        code: row.code,
      });
    }
  }
  return out;
}

describe('CSV writers', () => {
  it('long and wide files of the same panel hold the same rows (csv-parse)', () => {
    const panel = generatePanel({
      ...base,
      nWeeks: 8,
      faults: [
        { kind: 'missing-cells', assessor: 'A04', fromSession: 2 },
        { kind: 'duplicate', assessor: 'A03', fromSession: 5, product: 'REF' },
        { kind: 'decimal-shift', assessor: 'A02', fromSession: 4, product: 'T02', attributes: ['sweetness'] },
      ],
    });
    const long = ratingsFromLong(toLongCsv(panel));
    const wide = ratingsFromWide(toWideCsv(panel), panel);
    expect(long).toEqual(panel.rawRows);
    expect(wide).toEqual(panel.rawRows);
    // Attribute names with spaces and a comma-free header: the header is written as is.
    expect(toWideCsv(panel).split('\n')[0]).toBe(
      'session,date,assessor,product,replicate,code,sourness,sweetness,oat flavour,vanilla flavour,cardboard off-flavour,thickness,creaminess,graininess,astringency,bitter aftertaste',
    );
  });

  it('panel settings name the scale, every attribute with anchors and the reference product', () => {
    const settings = panelSettings(generatePanel({ ...base, nWeeks: 1, faults: 'none' }));
    expect(settings.scale).toEqual({ min: 0, max: 10 });
    expect(settings.attributes.sweetness).toEqual({ min: 0, max: 10, anchorLow: 'not sweet', anchorHigh: 'very sweet' });
    expect(settings.products.REF.role).toBe('reference');
    expect(Object.keys(settings.products)).toHaveLength(8);
  });
});

describe('long and wide files through the ingest reader', () => {
  it('parse to the same ratings and the same problems', async () => {
    const panel = generatePanel({
      ...base,
      nWeeks: 6,
      faults: [
        { kind: 'missing-cells', assessor: 'A04', fromSession: 2 },
        { kind: 'decimal-shift', assessor: 'A02', fromSession: 4, product: 'T02', attributes: ['sweetness'] },
        { kind: 'out-of-scale', assessor: 'A05', fromSession: 1, product: 'REF', attributes: ['thickness'] },
      ],
    });
    const read = async (text: string, fileName: string) => {
      const ratings: Rating[] = [];
      const problems: string[] = [];
      for await (const event of readRatings({ bytes: Buffer.from(text, 'utf8') }, { fileName, scaleFor: () => panel.scale })) {
        if (event.type === 'rating') ratings.push(event.rating);
        if (event.type === 'problem') problems.push(`${event.problem.code}|${event.cell?.assessor}|${event.cell?.product}|${event.cell?.attribute}`);
      }
      return { ratings, problems };
    };
    const long = await read(toLongCsv(panel), 'panel-long.csv');
    const wide = await read(toWideCsv(panel), 'panel-wide.csv');
    expect(long.ratings).toEqual(panel.ratings);
    expect(wide.ratings).toEqual(panel.ratings);
    expect(long.problems.sort()).toEqual(wide.problems.sort());
    // The two invalid cells are the reader's only problems, each named for what it is.
    expect(long.problems.sort()).toEqual(['decimal-shift|A02|T02|sweetness', 'out-of-scale|A05|REF|thickness']);
  });
});
