/**
 * The report views from hand-made stored results: what changed since the previous session, the
 * open-case marks, the Satterthwaite note, and the feedback sheet's privacy (no other assessor's
 * code or value anywhere in its view).
 */
import { describe, expect, it } from 'vitest';
import type { FitJson } from '../../domain/analysis.js';
import type { AssessorSessionIndices } from '../../analysis/indices/types.js';
import { buildAssessorFeedbackView } from '../../report/assessor-feedback-view.js';
import { buildIndexTables, type ReportSessionInput } from '../../report/report-common.js';
import { buildSessionReportView, sessionChanges } from '../../report/session-report-view.js';
import { pText } from '../../report/report-format.js';

const ASSESSORS = ['QX1', 'QX2', 'QX3', 'QX4', 'QX5'];

function fit(session: string, attribute: string, means: Record<string, [number, number]>, denDf = 12): FitJson {
  return {
    session,
    attribute,
    model: 'session',
    n: ASSESSORS.length * Object.keys(means).length * 2,
    assessors: ASSESSORS.length,
    products: Object.keys(means).length,
    variance: { assessor: 0.2, 'assessor:product': 0.1, residual: 0.3 },
    remlCriterion: 0,
    productTest: { F: 12.5, numDf: Object.keys(means).length - 1, denDf, p: 0.0004 },
    productMeans: Object.entries(means).map(([product, [mean, se]]) => ({ product, mean, se })),
    assessorEffects: [],
  };
}

function indices(session: string, attribute: string, offsets: number[]): AssessorSessionIndices[] {
  return ASSESSORS.map((assessor, i) => ({
    session,
    attribute,
    assessor,
    nProducts: 3,
    nRatings: 6,
    offset: offsets[i],
    offsetT: null,
    offsetDf: null,
    offsetP: null,
    discriminationF: 5 + i,
    discriminationDfNumerator: 2,
    discriminationDfDenominator: 3,
    discriminationP: 0.05,
    repeatabilityMSE: 0.25 * (i + 1),
    repeatabilityDf: 3,
    repeatabilitySdRatio: 1,
    repeatabilityF: null,
    repeatabilityP: null,
    agreementR: 0.9 - i * 0.1,
    disagreementF: null,
    disagreementP: null,
    scaling: 1,
    scalingT: null,
    scalingP: null,
    reasons: [],
  }));
}

function session(label: string, date: string, means: Record<string, [number, number]>, offsets = [0.9, -0.2, 0.1, -0.3, -0.5], present = ASSESSORS): ReportSessionInput {
  return {
    label,
    date,
    dataVersion: 1,
    fittedDataVersion: 1,
    fitNotes: [],
    attributes: [
      {
        attribute: 'sweetness',
        fit: fit(label, 'sweetness', means),
        reliability: { relativeCoefficient: 0.92, absoluteCoefficient: 0.85 },
        indices: indices(label, 'sweetness', offsets).filter((row) => present.includes(row.assessor)),
      },
    ],
  };
}

describe('what differs from the previous session', () => {
  it('lists a product mean beyond 2 SE of the difference and not one inside it, and who came and went', () => {
    const before = session('W1', '2026-01-05', { P1: [5, 0.2], P2: [6, 0.2], P3: [4, 0.2] });
    // P1 moves 0.5 (bound 2·√0.08 = 0.566: inside); P2 moves 0.7 (outside).
    const now = session('W2', '2026-01-12', { P1: [5.5, 0.2], P2: [6.7, 0.2], P3: [4, 0.2] }, undefined, ['QX1', 'QX2', 'QX3', 'QX4']);
    const changes = sessionChanges(now, before);
    expect(changes.movedMeans.map((m) => m.product)).toEqual(['P2']);
    expect(changes.movedMeans[0].bound).toBeCloseTo(2 * Math.sqrt(0.08), 12);
    expect(changes.assessorsAbsent).toEqual(['QX5']);
    expect(changes.sentence).toContain('1 product mean moved');
    expect(sessionChanges(now, null).previousSession).toBeNull();
  });
});

describe('session report view', () => {
  const now = session('W2', '2026-01-12', { P1: [5, 0.2], P2: [6, 0.2], P3: [4, 0.2] });
  const view = buildSessionReportView({
    panel: 'Test panel',
    session: now,
    previous: null,
    attributes: [{ name: 'sweetness', scaleMin: 0, scaleMax: 10 }],
    referenceProducts: ['P3'],
    openCases: [
      { kind: 'lenient', assessor: 'QX1', product: null, attribute: 'sweetness', severity: 'act', message: 'QX1 rates sweetness higher.' },
      { kind: 'decimal-shift', assessor: 'QX2', product: 'P1', attribute: 'sweetness', severity: 'act', message: 'A typo.' },
    ],
    findings: [{ code: 'out-of-scale', message: 'Value 12 is above the scale.', file: 'w2.csv', row: 7, column: 'value', session: 'W2', isHeld: true }],
    generatedAt: new Date('2026-01-13T09:30:00Z'),
    isStandaloneFile: false,
  });

  it('gives the product test, the variance shares (summing to 100 %) and the reference product', () => {
    const [a] = view.attributes;
    expect(a.productTest?.pText).toBe('< 0.001');
    expect(a.productTest?.isSatterthwaite).toBe(false);
    expect(a.varianceShares.reduce((s, v) => s + v.sharePercent, 0)).toBeCloseTo(100, 10);
    expect(a.varianceShares.map((v) => Math.round(v.sharePercent))).toEqual([33, 17, 50]);
    expect(a.productMeans.find((m) => m.product === 'P3')?.isReference).toBe(true);
  });

  it('marks an open level case in the level table only, and never a data-entry case', () => {
    const tables = buildIndexTables([now], ['sweetness'], view.indexTables.length ? [{ kind: 'lenient', assessor: 'QX1', product: null, attribute: 'sweetness', severity: 'act', message: 'm' }] : []);
    const marked = tables.flatMap((t) => t.rows.filter((r) => r.cells[0].hasCase).map((r) => `${t.key}:${r.assessor}`));
    expect(marked).toEqual(['level:QX1']);
    const inView = view.indexTables.flatMap((t) => t.rows.filter((r) => r.cells[0].hasCase).map((r) => r.assessor));
    expect(inView).not.toContain('QX2');
  });

  it('keeps the held cell with its place and carries the cautions', () => {
    expect(view.findings[0]).toMatchObject({ isHeld: true, where: 'w2.csv, row 7, column value' });
    expect(view.cautions.join(' ')).toContain('not judgements of people');
    expect(view.cautions.join(' ')).toContain('No flag is not proof');
  });

  it('says Satterthwaite when the denominator df are fractional', () => {
    const odd = session('W3', '2026-01-19', { P1: [5, 0.2], P2: [6, 0.2] });
    odd.attributes[0].fit = fit('W3', 'sweetness', { P1: [5, 0.2], P2: [6, 0.2] }, 7.36);
    const v = buildSessionReportView({ ...{ panel: 'p', previous: null, attributes: [], referenceProducts: [], openCases: [], findings: [], generatedAt: new Date(), isStandaloneFile: true }, session: odd });
    expect(v.attributes[0].productTest?.isSatterthwaite).toBe(true);
    expect(v.attributes[0].productTest?.dfText).toBe('1 and 7.4');
    expect(v.links).toBeNull();
  });
});

describe('assessor feedback sheet', () => {
  const sessions = [session('W1', '2026-01-05', { P1: [5, 0.2], P2: [6, 0.2], P3: [4, 0.2] }), session('W2', '2026-01-12', { P1: [5, 0.2], P2: [6, 0.2], P3: [4, 0.2] })];
  const view = buildAssessorFeedbackView({
    panel: 'Test panel',
    assessor: 'QX1',
    sessions,
    attributes: [{ name: 'sweetness', scaleMin: 0, scaleMax: 10 }],
    referenceProducts: ['P3'],
    ownReferenceRatings: [
      { session: 'W1', attribute: 'sweetness', product: 'P3', value: 4.5 },
      { session: 'W2', attribute: 'sweetness', product: 'P3', value: 5.5 },
    ],
    generatedAt: new Date('2026-01-13T09:30:00Z'),
    isStandaloneFile: false,
  });

  it('holds no other assessor code anywhere in its view (page and JSON twin come from it)', () => {
    const text = JSON.stringify(view);
    expect(text).toContain('QX1');
    for (const other of ASSESSORS.filter((a) => a !== 'QX1')) expect(text).not.toContain(other);
  });

  it('places the assessor against the panel middle half in plain words', () => {
    const level = view.measures.find((m) => m.key === 'level')!;
    expect(level.rows[0]).toMatchObject({ ownText: '+0.90', words: 'higher than most of the panel' });
    expect(level.sentence).toBe('Higher than most of the panel on 1 of 1 attribute: sweetness (+0.90).');
    const repeatability = view.measures.find((m) => m.key === 'repeatability')!;
    expect(repeatability.rows[0].ownText).toBe('0.50'); // √0.25
    expect(view.reference.rows[0]).toMatchObject({ product: 'P3', ownMeanText: '5.00', panelMeanText: '4.00', differenceText: '+1.00', nOwn: 2 });
  });
});

describe('number wording', () => {
  it('formats p one way', () => {
    expect([0.0004, 0.004, 0.04, 0.5].map(pText)).toEqual(['< 0.001', '0.004', '0.04', '0.50']);
  });
});
