/**
 * Seeded synthetic PanelHistory for flag tests: per-session indices are drawn directly from simple
 * distributions (not computed from ratings), so each flag rule can be tested on its own.
 * Clean assessors: level offsets within ±0.4 points (4 % of a 0–10 scale) plus session noise SD 0.3;
 * SD ratio log-normal (SD 0.15); product F log-normal around 8; agreement r around 0.9; scaling
 * around 1 (log SD 0.1). Faults change one assessor's (or product's) distribution from a session on.
 */
import type { FitJson } from '../../../../domain/analysis.js';
import type { FlagKind } from '../../../../domain/flags.js';
import { fUpperTail, tTwoSidedP } from '../../../../analysis/distributions/index.js';
import type { AssessorSessionIndices } from '../../../../analysis/indices/types.js';
import type { PanelHistory, SessionAttributeResult } from '../../../../analysis/monitor/series.js';
import { seededRandom } from './random.js';

export interface SyntheticFault {
  kind: FlagKind;
  assessor?: string;
  product?: string;
  /** Default: all attributes. */
  attributes?: string[];
  /** 0-based first affected session (default 0). */
  fromSession?: number;
  /** 0-based last affected session, inclusive (default: to the end). */
  toSession?: number;
  size?: number;
}

export interface SyntheticOptions {
  seed: number;
  nSessions?: number;
  nAssessors?: number;
  nAttributes?: number;
  faults?: SyntheticFault[];
}

export const PRODUCTS = ['REF', 'T01', 'T02', 'T03', 'T04', 'T05'];

export function assessorName(index: number): string {
  return `A${String(index + 1).padStart(2, '0')}`;
}

export function sessionLabel(index: number): string {
  return `S${String(index + 1).padStart(2, '0')}`;
}

/** Weekly dates from 2026-01-05. */
export function sessionDate(index: number): string {
  return new Date(Date.UTC(2026, 0, 5 + 7 * index)).toISOString().slice(0, 10);
}

export function syntheticHistory(options: SyntheticOptions): PanelHistory {
  const rng = seededRandom(options.seed);
  const nSessions = options.nSessions ?? 30;
  const nAssessors = options.nAssessors ?? 10;
  const nAttributes = options.nAttributes ?? 5;
  const faults = options.faults ?? [];
  const attributes = Array.from({ length: nAttributes }, (_, j) => ({ name: `attr${j + 1}`, scaleMin: 0, scaleMax: 10 }));
  const assessors = Array.from({ length: nAssessors }, (_, a) => assessorName(a));
  const sessions = Array.from({ length: nSessions }, (_, s) => ({ label: sessionLabel(s), date: sessionDate(s) }));
  const baseLevel = assessors.map(() => attributes.map(() => Math.max(-0.4, Math.min(0.4, rng.normal(0, 0.2)))));
  const productProfile = attributes.map(() => PRODUCTS.map(() => rng.uniform() * 6 + 2));
  const active = (kind: FlagKind, assessor: string | null, attribute: string, s: number) =>
    faults.filter((f) => f.kind === kind && (assessor === null || f.assessor === assessor) && (f.attributes ?? [attribute]).includes(attribute) && s >= (f.fromSession ?? 0) && s <= (f.toSession ?? Infinity));
  const results: SessionAttributeResult[] = [];
  for (let s = 0; s < nSessions; s++) {
    for (let j = 0; j < nAttributes; j++) {
      const attribute = attributes[j].name;
      const indices: AssessorSessionIndices[] = assessors.map((assessor, a) => {
        let offset = baseLevel[a][j] + rng.normal(0, 0.3);
        let sdRatio = Math.exp(rng.normal(0, 0.15));
        let logF = rng.normal(Math.log(8), 0.5);
        let zR = rng.normal(Math.atanh(0.9), 0.3);
        let scaling = Math.exp(rng.normal(0, 0.1));
        for (const f of active('lenient', assessor, attribute, s)) offset += f.size ?? 1.5;
        for (const f of active('harsh', assessor, attribute, s)) offset -= f.size ?? 1.5;
        for (const f of active('drift', assessor, attribute, s)) offset += (f.size ?? 0.08) * (s - (f.fromSession ?? 0) + 1);
        for (const f of active('inconsistent', assessor, attribute, s)) sdRatio *= f.size ?? 2.5;
        for (const f of active('non-discriminating', assessor, attribute, s)) {
          logF = rng.normal(0, 0.5);
          zR = rng.normal(Math.atanh(0.2), 0.4);
          scaling = f.size ?? 0.1;
        }
        for (const f of active('disagreement', assessor, attribute, s)) zR = rng.normal(Math.atanh(f.size ?? 0.3), 0.3);
        for (const f of active('reversed', assessor, attribute, s)) {
          zR = rng.normal(-Math.atanh(0.8), 0.3);
          scaling = -(f.size ?? 1);
        }
        for (const f of active('scale-compression', assessor, attribute, s)) scaling *= f.size ?? 0.45;
        for (const f of active('scale-expansion', assessor, attribute, s)) scaling *= f.size ?? 2.2;
        const offsetT = offset / 0.3;
        const discriminationF = Math.exp(logF);
        return {
          session: sessionLabel(s),
          attribute,
          assessor,
          nProducts: 5,
          nRatings: 10,
          offset,
          offsetT,
          offsetDf: 4,
          offsetP: tTwoSidedP(offsetT, 4),
          discriminationF,
          discriminationDfNumerator: 4,
          discriminationDfDenominator: 5,
          discriminationP: fUpperTail(discriminationF, 4, 5),
          repeatabilityMSE: 0.2 * sdRatio * sdRatio,
          repeatabilityDf: 5,
          repeatabilitySdRatio: sdRatio,
          repeatabilityF: sdRatio * sdRatio,
          repeatabilityP: fUpperTail(sdRatio * sdRatio, 5, 45),
          agreementR: Math.tanh(zR),
          disagreementF: null,
          disagreementP: null,
          scaling,
          scalingT: null,
          scalingP: null,
          reasons: [],
        };
      });
      const productMeans = PRODUCTS.slice(0, 5).map((product, p) => {
        let mean = productProfile[j][p] + rng.normal(0, 0.15);
        for (const f of active('unstable-product', null, attribute, s)) if (f.product === product) mean += f.size ?? 1.5;
        return { product, mean, se: 0.2 };
      });
      const fit: FitJson = {
        session: sessionLabel(s),
        attribute,
        model: 'session',
        n: nAssessors * 5 * 2,
        assessors: nAssessors,
        products: 5,
        variance: { assessor: 0.1, 'assessor:product': 0.05, residual: 0.2 },
        remlCriterion: 0,
        productTest: { F: 40, numDf: 4, denDf: 36, p: 1e-6 },
        productMeans,
        assessorEffects: [],
      };
      results.push({ session: sessionLabel(s), date: sessionDate(s), attribute, scaleMin: 0, scaleMax: 10, fit, indices, productTestP: 1e-6 });
    }
  }
  return { sessions, attributes, referenceProducts: ['REF'], results, importFindings: [], events: [] };
}
