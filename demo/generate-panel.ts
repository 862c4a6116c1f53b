/**
 * Seeded generator of realistic descriptive-panel data with planted faults and a ground-truth
 * record of every fault. Pure: no I/O, no clock, randomness only from the seed.
 *
 * Model for one rating (assessor a, session s, product p, replicate r, attribute j):
 *   y = m_j + S_sj + b_aj + (bS)_asj + β_aj·(μ_pj(s) + (τS)_psj − m_j) + c_apj + (cS)_apsj + k_a·e
 * with m_j the attribute's mean over the true product profiles μ_pj, S a panel-wide session shift,
 * b the assessor's level offset, β the assessor's scaling, c/cS persistent and session-specific
 * assessor×product disagreement, k_a the assessor's noise multiplier and e ~ N(0, σ²_E) the
 * replicate noise; then clipped to the scale and rounded to 0.1.
 *
 * Base randomness is drawn in a fixed order that does not depend on the planted faults (faults
 * draw from their own stream), so a panel with faults equals the same seed's clean panel
 * everywhere except in the cells the faults touch.
 */
import type { FlagKind } from '../domain/flags.js';
import { FLAG_KINDS } from '../domain/flags.js';
import type { Rating } from '../domain/ratings.js';
import { createRandom, streamSeed, type RandomSource } from './random.js';
import {
  CLEAN_MODEL,
  RECURRING_PRODUCTS,
  ROTATING_PRODUCTS,
  SCENARIO_ATTRIBUTES,
  SCENARIO_PANEL_NAME,
  SCENARIO_PRODUCTS,
  type ScenarioProduct,
} from './scenario.js';

/** What to plant; everything but `kind` has a kind-specific default. */
export interface FaultSpec {
  kind: FlagKind;
  assessor?: string | null;
  product?: string | null;
  /** swapped-codes: the second product. */
  otherProduct?: string | null;
  /** null/undefined: the kind's default attribute choice (see DEFAULT_FAULT_SIZES). */
  attributes?: string[] | null;
  /** 0-based index of the first affected session. */
  fromSession?: number;
  /** 0-based index of the last affected session (inclusive). */
  toSession?: number;
  /** Kind-specific magnitude, see DEFAULT_FAULT_SIZES. */
  size?: number;
  /** swapped-codes only: the one replicate whose ratings were exchanged (default: all). */
  replicate?: number | null;
  /** drift only: 'linear' (size per session, default) or 'step' (size added from fromSession on). */
  shape?: 'linear' | 'step';
}

/** One cell a data-quality fault changed, as written to the file. */
export interface PlantedCell {
  session: string;
  assessor: string;
  product: string;
  replicate: number;
  attribute: string;
  /** Clean value before the fault (null when the clean cell did not exist). */
  cleanValue: number | null;
  /** Value written to the file (null when the fault removed the cell). */
  fileValue: number | null;
}

/** Ground truth for one planted fault, with every default resolved. */
export interface PlantedFault {
  kind: FlagKind;
  assessor: string | null;
  product: string | null;
  otherProduct: string | null;
  /** Affected attributes; null = every attribute. */
  attributes: string[] | null;
  fromSession: number;
  toSession: number;
  firstSession: string;
  lastSession: string;
  /** Kind-specific magnitude actually used. */
  size: number | null;
  replicate: number | null;
  /** Data-quality kinds: the cells changed. Model kinds: empty. */
  cells: PlantedCell[];
  /** drift only: linear (size per session) or a step of size. */
  shape?: 'linear' | 'step';
  /** One plain sentence saying what was planted. */
  description: string;
}

export interface PanelScenarioOptions {
  seed: number;
  /** Weekly sessions. */
  nWeeks: number;
  /** Assessor codes A01, A02, …. */
  nAssessors: number;
  /** Date of the first session, YYYY-MM-DD. */
  startDate: string;
  faults: FaultSpec[] | 'demo' | 'none';
  /** 4–6 (default 5): the reference, up to three recurring test products, then rotating ones. */
  nProductsPerSession?: number;
  /** Default 2. */
  nReplicates?: number;
  /** First n attributes of the scenario, 3–10 (default 10). */
  nAttributes?: number;
  /** Probability that an assessor misses a whole session (default 0.02). */
  absenceRate?: number;
  panelName?: string;
  /** Spreads of the clean model to use instead of CLEAN_MODEL's (draw order unchanged). */
  model?: Partial<CleanModel>;
  /** Broader panel structure; all off by default (the panels without it are unchanged). */
  structure?: PanelStructure;
}

export type CleanModel = { -readonly [K in keyof typeof CLEAN_MODEL]: number };

/** Structure seen on real panels; every random draw it needs comes from its own stream. */
export interface PanelStructure {
  /** Ratings written as whole numbers (a 0–10 scale with integer steps). */
  integerScale?: boolean;
  /** Share of single ratings missing at random (e.g. 0.03). */
  missingRatingRate?: number;
  /** Whole samples (assessor × product × replicate) missing, per panel (e.g. 3). */
  nMissingSamples?: number;
  /** SD of an assessor × session term shared by all attributes (a "day" effect), scale points. */
  assessorDaySd?: number;
  /** Assessors present only from / until a session (0-based, inclusive): joiners and leavers. */
  roster?: { assessor: string; fromSession?: number; toSession?: number }[];
  /** 0-based sessions with only `holidayAssessors` assessors present (short holiday sessions). */
  holidaySessions?: number[];
  /** Assessors present in a holiday session (default 6). */
  holidayAssessors?: number;
}

export interface GeneratedAttribute {
  name: string;
  scaleMin: number;
  scaleMax: number;
  anchorLow: string;
  anchorHigh: string;
}

export interface GeneratedProduct {
  code: string;
  name: string;
  role: 'test' | 'reference';
}

export interface GeneratedSession {
  label: string;
  date: string;
  /** Product codes served, reference first. */
  products: string[];
  /** Assessors present. */
  assessors: string[];
}

/** One served sample as a row of the wide form; null = no rating for that attribute. */
export interface SampleRow {
  session: string;
  date: string;
  assessor: string;
  product: string;
  replicate: number;
  code: string;
  /** One entry per attribute, in `attributes` order. */
  values: (number | null)[];
}

export interface GeneratedPanel {
  panelName: string;
  scale: { min: number; max: number };
  attributes: GeneratedAttribute[];
  products: GeneratedProduct[];
  assessors: string[];
  sessions: GeneratedSession[];
  /** The valid ratings the analysis should see (invalid cells removed, duplicates kept once). */
  ratings: Rating[];
  /** The rows as written to a long file, including out-of-scale values and duplicate rows. */
  rawRows: Rating[];
  /** The samples as written to a wide file (same content as rawRows). */
  rawSamples: SampleRow[];
  truth: PlantedFault[];
  /** Whole samples left out by `structure.nMissingSamples` (not faults; a missing-cells flag there is right). */
  droppedSamples: { session: string; assessor: string; product: string; replicate: number }[];
}

/** Default magnitudes (scale points on the 0–10 scale unless said otherwise). */
export const DEFAULT_FAULT_SIZES: Record<FlagKind, number> = {
  lenient: 1.5, // level offset added
  harsh: 1.5, // level offset subtracted
  drift: 0.08, // level change per weekly session
  inconsistent: 2.5, // replicate-noise SD multiplier
  'non-discriminating': 0.1, // scaling coefficient (profile flattened)
  disagreement: 1, // SD of an extra persistent assessor×product term, in units of the attribute's product spread
  reversed: 1, // scaling coefficient becomes −size
  'scale-compression': 0.45, // scaling coefficient
  'scale-expansion': 1.9, // scaling coefficient
  'unstable-product': 1.5, // step in the product's true profile
  'out-of-scale': 1, // the value written is −(value + size·0.5) (a sign slip)
  'decimal-shift': 10, // the value written is value × size
  duplicate: 1, // copies added
  'swapped-codes': 1, // unused
  'missing-cells': 0.4, // share of the assessor's cells in the session removed
  'straight-lining': 4, // number of attributes rated flat
};

const ONE_SESSION_KINDS = new Set<FlagKind>([
  'out-of-scale',
  'decimal-shift',
  'duplicate',
  'swapped-codes',
  'missing-cells',
  'straight-lining',
]);
/** Lenient, harsh, drift, inconsistent, …: a change in how one assessor rates over a period. */
const PERSISTENT_ASSESSOR_KINDS = new Set<FlagKind>(FLAG_KINDS.filter((k) => !ONE_SESSION_KINDS.has(k) && k !== 'unstable-product'));

const MS_PER_DAY = 86_400_000;

function addDays(isoDate: string, days: number): string {
  const base = Date.parse(`${isoDate}T00:00:00Z`);
  return new Date(base + days * MS_PER_DAY).toISOString().slice(0, 10);
}

function round1(x: number): number {
  return Math.round(x * 10) / 10;
}

function clip(x: number, lo: number, hi: number): number {
  return Math.min(hi, Math.max(lo, x));
}

function pad(n: number, width: number): string {
  return String(n).padStart(width, '0');
}

function assessorCode(index: number): string {
  return `A${pad(index + 1, 2)}`;
}

function sessionLabel(index: number, nWeeks: number): string {
  return `S${pad(index + 1, Math.max(2, String(nWeeks).length))}`;
}

/** The 'demo' preset: a few problems for reports to find, the rest clean. */
export function demoFaults(nWeeks: number, nAssessors: number): FaultSpec[] {
  if (nAssessors < 10) throw new Error('The demo faults need at least 10 assessors.');
  const mid = Math.floor(nWeeks / 2);
  return [
    { kind: 'lenient', assessor: 'A03', size: 1.3 },
    { kind: 'drift', assessor: 'A07', fromSession: mid, size: 0.08 },
    { kind: 'inconsistent', assessor: 'A10', size: 2.5 },
    { kind: 'swapped-codes', assessor: 'A05', fromSession: Math.floor(nWeeks * 0.4), product: 'REF', otherProduct: 'T02' },
    { kind: 'unstable-product', product: 'T01', attributes: ['sourness'], fromSession: mid, size: 1.5 },
    { kind: 'decimal-shift', assessor: 'A02', fromSession: Math.floor(nWeeks * 0.3), product: 'T03', attributes: ['thickness'] },
  ];
}

interface AssessorParams {
  level: number[];
  scaling: number[];
  noiseMultiplier: number;
  persistentDisagreement: number[][]; // [productIndex][attribute]
}

interface Cell {
  /** Model value before rounding/clipping. */
  latent: number;
  value: number;
}

function validateOptions(options: PanelScenarioOptions): Required<Omit<PanelScenarioOptions, 'faults' | 'model' | 'structure'>> {
  const nProductsPerSession = options.nProductsPerSession ?? 5;
  const nReplicates = options.nReplicates ?? 2;
  const nAttributes = options.nAttributes ?? SCENARIO_ATTRIBUTES.length;
  const absenceRate = options.absenceRate ?? 0.02;
  if (!Number.isInteger(options.nWeeks) || options.nWeeks < 1 || options.nWeeks > 520) {
    throw new Error('nWeeks must be a whole number from 1 to 520.');
  }
  if (!Number.isInteger(options.nAssessors) || options.nAssessors < 3 || options.nAssessors > 99) {
    throw new Error('nAssessors must be a whole number from 3 to 99.');
  }
  if (!Number.isInteger(nProductsPerSession) || nProductsPerSession < 2 || nProductsPerSession > 6) {
    throw new Error('nProductsPerSession must be a whole number from 2 to 6.');
  }
  if (!Number.isInteger(nReplicates) || nReplicates < 1 || nReplicates > 4) {
    throw new Error('nReplicates must be a whole number from 1 to 4.');
  }
  if (!Number.isInteger(nAttributes) || nAttributes < 3 || nAttributes > SCENARIO_ATTRIBUTES.length) {
    throw new Error(`nAttributes must be a whole number from 3 to ${SCENARIO_ATTRIBUTES.length}.`);
  }
  if (!(absenceRate >= 0 && absenceRate < 0.5)) throw new Error('absenceRate must be in [0, 0.5).');
  if (!/^\d{4}-\d{2}-\d{2}$/.test(options.startDate) || Number.isNaN(Date.parse(`${options.startDate}T00:00:00Z`))) {
    throw new Error('startDate must be a date written YYYY-MM-DD.');
  }
  return {
    seed: options.seed,
    nWeeks: options.nWeeks,
    nAssessors: options.nAssessors,
    startDate: options.startDate,
    nProductsPerSession,
    nReplicates,
    nAttributes,
    absenceRate,
    panelName: options.panelName ?? SCENARIO_PANEL_NAME,
  };
}

function servedProducts(week: number, nProducts: number): string[] {
  const served = ['REF', ...RECURRING_PRODUCTS.slice(0, Math.min(RECURRING_PRODUCTS.length, nProducts - 1))];
  for (let k = 0; served.length < nProducts; k++) {
    served.push(ROTATING_PRODUCTS[(week + k) % ROTATING_PRODUCTS.length]);
  }
  return served;
}

/** Profile spread (SD over all products) per attribute: how strongly products differ. */
function attributeSpread(products: readonly ScenarioProduct[], j: number): number {
  const xs = products.map((p) => p.profile[j]);
  const mean = xs.reduce((s, x) => s + x, 0) / xs.length;
  return Math.sqrt(xs.reduce((s, x) => s + (x - mean) ** 2, 0) / (xs.length - 1));
}

function profileDistance(a: ScenarioProduct, b: ScenarioProduct, nAttributes: number): number {
  let sum = 0;
  for (let j = 0; j < nAttributes; j++) sum += (a.profile[j] - b.profile[j]) ** 2;
  return Math.sqrt(sum);
}

function pickDistinct<T>(rng: RandomSource, pool: readonly T[], count: number): T[] {
  const copy = [...pool];
  const picked: T[] = [];
  while (picked.length < count && copy.length > 0) picked.push(copy.splice(rng.integer(copy.length), 1)[0]);
  return picked;
}

export function generatePanel(options: PanelScenarioOptions): GeneratedPanel {
  const opts = validateOptions(options);
  const { nWeeks, nAssessors, nReplicates, nAttributes } = opts;
  const scale = { min: 0, max: 10 };
  const attributes = SCENARIO_ATTRIBUTES.slice(0, nAttributes).map((a) => ({ ...a }));
  const attributeNames = attributes.map((a) => a.name);
  const products = SCENARIO_PRODUCTS;
  const productIndex = new Map(products.map((p, i) => [p.code, i]));
  const assessors = Array.from({ length: nAssessors }, (_, i) => assessorCode(i));
  const assessorIndex = new Map(assessors.map((a, i) => [a, i]));
  const attributeMeans = attributeNames.map((_, j) => products.reduce((s, p) => s + p.profile[j], 0) / products.length);
  const scaleRange = scale.max - scale.min;

  const CLEAN: CleanModel = { ...CLEAN_MODEL, ...options.model };
  const structure = options.structure ?? {};
  // ---- base randomness, fixed order ----
  const rng = createRandom(streamSeed(opts.seed, 0));
  const params: AssessorParams[] = assessors.map(() => {
    const general = CLEAN.assessorLevelSd * rng.normal();
    const maxLevel = CLEAN.maxCleanLevelFraction * scaleRange;
    const level = attributeNames.map(() => clip(general + CLEAN.assessorAttributeLevelSd * rng.normal(), -maxLevel, maxLevel));
    const generalScaling = 0.7 * CLEAN.scalingLogSd * rng.normal();
    const scaling = attributeNames.map(() =>
      clip(Math.exp(generalScaling + 0.7 * CLEAN.scalingLogSd * rng.normal()), CLEAN.minCleanScaling, CLEAN.maxCleanScaling),
    );
    const noiseMultiplier = clip(
      Math.exp(CLEAN.noiseMultiplierLogSd * rng.normal()),
      CLEAN.minNoiseMultiplier,
      CLEAN.maxNoiseMultiplier,
    );
    const persistentDisagreement = products.map(() => attributeNames.map(() => CLEAN.persistentDisagreementSd * rng.normal()));
    return { level, scaling, noiseMultiplier, persistentDisagreement };
  });

  const sessions: GeneratedSession[] = [];
  // Session terms and replicate noise ([session][assessor][product][replicate][attribute]) are drawn
  // for every assessor and every product of the range, so the draw order never depends on who was
  // present or what was served.
  const sessionShift: number[][] = [];
  const assessorSession: number[][][] = [];
  const productBatch: number[][][] = [];
  const sessionDisagreement: number[][][][] = [];
  const replicateNoise: number[][][][][] = [];
  const sampleCodes: Map<string, string>[] = [];
  const absent: boolean[][] = [];
  for (let s = 0; s < nWeeks; s++) {
    const served = servedProducts(s, opts.nProductsPerSession);
    sessionShift.push(attributeNames.map(() => CLEAN.sessionShiftSd * rng.normal()));
    productBatch.push(products.map(() => attributeNames.map(() => CLEAN.productBatchSd * rng.normal())));
    assessorSession.push(assessors.map(() => attributeNames.map(() => CLEAN.assessorSessionSd * rng.normal())));
    sessionDisagreement.push(assessors.map(() => products.map(() => attributeNames.map(() => CLEAN.sessionDisagreementSd * rng.normal()))));
    replicateNoise.push(
      assessors.map(() =>
        products.map(() => Array.from({ length: nReplicates }, () => attributeNames.map(() => CLEAN.replicateSd * rng.normal()))),
      ),
    );
    absent.push(assessors.map(() => rng.uniform() < opts.absenceRate));
    const codes = new Map<string, string>();
    const used = new Set<string>();
    for (const product of served) {
      for (let r = 1; r <= nReplicates; r++) {
        let code: string;
        do code = String(100 + rng.integer(900));
        while (used.has(code));
        used.add(code);
        codes.set(`${product}|${r}`, code);
      }
    }
    sampleCodes.push(codes);
    sessions.push({ label: sessionLabel(s, nWeeks), date: addDays(opts.startDate, 7 * s), products: served, assessors: [] });
  }

  // ---- panel structure (own stream, so panels without it are unchanged) ----
  const srng = createRandom(streamSeed(opts.seed, 2));
  const assessorDay = sessions.map(() => assessors.map(() => (structure.assessorDaySd ?? 0) * srng.normal()));
  for (const entry of structure.roster ?? []) {
    const a = assessorIndex.get(entry.assessor);
    if (a === undefined) throw new Error(`The roster names assessor ${entry.assessor}, who is not on the panel.`);
    for (let s = 0; s < nWeeks; s++) if (s < (entry.fromSession ?? 0) || s > (entry.toSession ?? nWeeks - 1)) absent[s][a] = true;
  }
  for (const s of structure.holidaySessions ?? []) {
    if (!(s >= 0 && s < nWeeks)) throw new Error(`Holiday session ${s + 1} is outside 1..${nWeeks}.`);
    const present = assessors.map((_, a) => a).filter((a) => !absent[s][a]);
    const keep = new Set(pickDistinct(srng, present, structure.holidayAssessors ?? 6));
    for (const a of present) if (!keep.has(a)) absent[s][a] = true;
  }

  // ---- resolve faults (own stream) ----
  const frng = createRandom(streamSeed(opts.seed, 1));
  const specs: FaultSpec[] =
    options.faults === 'none' ? [] : options.faults === 'demo' ? demoFaults(nWeeks, nAssessors) : options.faults;
  const attributeSpreads = attributeNames.map((_, j) => attributeSpread(products, j));
  const spreadOrder = attributeNames
    .map((name, j) => ({ name, spread: attributeSpreads[j] }))
    .sort((x, y) => y.spread - x.spread)
    .map((x) => x.name);
  const truth: PlantedFault[] = specs.map((spec) =>
    resolveFault(spec, { frng, nWeeks, assessorIndex, productIndex, attributeNames, spreadOrder, sessions, absent, nAttributes, nReplicates }),
  );
  // Decimal shifts whose attribute was left to the generator: moved to an attribute where the
  // shifted value leaves the scale (a 0.8 written as 8 is not a visible decimal shift).
  const movableCell = new Set(truth.filter((f, i) => f.kind === 'decimal-shift' && (specs[i].attributes ?? null) === null));
  // A one-session fault needs its assessor present.
  for (const fault of truth) {
    if (ONE_SESSION_KINDS.has(fault.kind) && fault.assessor !== null) {
      absent[fault.fromSession][assessorIndex.get(fault.assessor)!] = false;
    }
  }
  for (let s = 0; s < nWeeks; s++) sessions[s].assessors = assessors.filter((_, a) => !absent[s][a]);

  // ---- model-level faults: parameters per assessor/product/attribute/session ----
  const attributeSets = new Map(truth.map((fault) => [fault, new Set(fault.attributes ?? attributeNames)]));
  const attrSet = (fault: PlantedFault) => attributeSets.get(fault)!;
  const inWindow = (fault: PlantedFault, s: number) => s >= fault.fromSession && s <= fault.toSession;
  const extraDisagreement = new Map<string, number[][]>(); // fault index -> [product][attribute]
  truth.forEach((fault, k) => {
    if (fault.kind === 'disagreement') {
      // Per attribute: a random deviation per product, made uncorrelated with the true profile (so
      // it is disagreement, not a change of scale use) and scaled to size × the attribute's product
      // spread, so it is equally visible where products differ a lot and where they differ little.
      const byAttribute = attributeNames.map((_, j) => {
        const profile = products.map((p) => p.profile[j]);
        const profileMean = profile.reduce((x, y) => x + y, 0) / profile.length;
        const centred = profile.map((x) => x - profileMean);
        const draw = products.map(() => frng.normal());
        const drawMean = draw.reduce((x, y) => x + y, 0) / draw.length;
        const d = draw.map((x) => x - drawMean);
        const projection = d.reduce((acc, x, i) => acc + x * centred[i], 0) / centred.reduce((acc, x) => acc + x * x, 0);
        const orthogonal = d.map((x, i) => x - projection * centred[i]);
        const sd = Math.sqrt(orthogonal.reduce((acc, x) => acc + x * x, 0) / (orthogonal.length - 1));
        return orthogonal.map((x) => (fault.size! * attributeSpreads[j] * x) / sd);
      });
      extraDisagreement.set(String(k), products.map((_, pi) => attributeNames.map((__, j) => byAttribute[j][pi])));
    }
  });

  const cellValue = (s: number, a: number, pi: number, r: number, j: number): Cell => {
    const attribute = attributeNames[j];
    const product = products[pi];
    const p = params[a];
    let trueProfile = product.profile[j] + productBatch[s][pi][j];
    let scaling = p.scaling[j];
    let level = p.level[j];
    let disagreement = p.persistentDisagreement[pi][j] + sessionDisagreement[s][a][pi][j];
    let noise = p.noiseMultiplier * replicateNoise[s][a][pi][r][j];
    truth.forEach((fault, k) => {
      if (!inWindow(fault, s) || !attrSet(fault).has(attribute)) return;
      if (fault.kind === 'unstable-product') {
        if (fault.product === product.code) trueProfile += fault.size!;
        return;
      }
      if (fault.assessor !== assessors[a]) return;
      switch (fault.kind) {
        case 'lenient':
          level += fault.size!;
          break;
        case 'harsh':
          level -= fault.size!;
          break;
        case 'drift':
          level += fault.shape === 'step' ? fault.size! : fault.size! * (s - fault.fromSession + 1);
          break;
        case 'inconsistent':
          noise *= fault.size!;
          break;
        case 'non-discriminating':
        case 'scale-compression':
        case 'scale-expansion':
          scaling = fault.size!;
          break;
        case 'reversed':
          scaling = -fault.size!;
          break;
        case 'disagreement':
          disagreement += extraDisagreement.get(String(k))![pi][j];
          break;
        default:
          break;
      }
    });
    const latent =
      attributeMeans[j] +
      sessionShift[s][j] +
      level +
      assessorSession[s][a][j] +
      scaling * (trueProfile - attributeMeans[j]) +
      disagreement +
      assessorDay[s][a] +
      noise;
    return { latent, value: clip(structure.integerScale ? Math.round(latent) : round1(latent), scale.min, scale.max) };
  };

  // ---- clean samples (with model faults) ----
  const samples: SampleRow[] = [];
  const sampleKey = (s: number, assessor: string, product: string, r: number) => `${s}|${assessor}|${product}|${r}`;
  const sampleByKey = new Map<string, SampleRow>();
  for (let s = 0; s < nWeeks; s++) {
    const session = sessions[s];
    for (let a = 0; a < nAssessors; a++) {
      if (absent[s][a]) continue;
      for (const code of session.products) {
        const pi = productIndex.get(code)!;
        for (let r = 0; r < nReplicates; r++) {
          const row: SampleRow = {
            session: session.label,
            date: session.date,
            assessor: assessors[a],
            product: code,
            replicate: r + 1,
            code: sampleCodes[s].get(`${code}|${r + 1}`)!,
            values: attributeNames.map((_, j) => cellValue(s, a, pi, r, j).value),
          };
          samples.push(row);
          sampleByKey.set(sampleKey(s, assessors[a], code, r + 1), row);
        }
      }
    }
  }

  // ---- data-quality faults on the written samples ----
  const invalidCells = new Set<string>(); // sampleKey|j
  const duplicates: { after: SampleRow; copy: SampleRow }[] = [];
  for (const fault of truth) {
    if (!ONE_SESSION_KINDS.has(fault.kind)) continue;
    const s = fault.fromSession;
    const assessor = fault.assessor!;
    const session = sessions[s];
    const rowsOf = (product: string) =>
      Array.from({ length: nReplicates }, (_, r) => sampleByKey.get(sampleKey(s, assessor, product, r + 1))!);
    const attrIdx = (fault.attributes ?? attributeNames).map((name) => attributeNames.indexOf(name));
    const record = (row: SampleRow, j: number, cleanValue: number | null, fileValue: number | null) =>
      fault.cells.push({ session: session.label, assessor, product: row.product, replicate: row.replicate, attribute: attributeNames[j], cleanValue, fileValue });
    switch (fault.kind) {
      case 'straight-lining': {
        for (const j of attrIdx) {
          const rows = session.products.flatMap(rowsOf);
          const present = rows.map((row) => row.values[j]).filter((v): v is number => v !== null);
          const flat = clip(Math.round((present.reduce((x, y) => x + y, 0) / present.length) * 2) / 2, scale.min, scale.max);
          for (const row of rows) {
            record(row, j, row.values[j], flat);
            row.values[j] = flat;
          }
        }
        break;
      }
      case 'swapped-codes': {
        const first = rowsOf(fault.product!);
        const second = rowsOf(fault.otherProduct!);
        for (let r = 0; r < nReplicates; r++) {
          if (fault.replicate !== null && fault.replicate !== r + 1) continue;
          for (const j of attrIdx) {
            const x = first[r].values[j];
            const y = second[r].values[j];
            record(first[r], j, x, y);
            record(second[r], j, y, x);
            first[r].values[j] = y;
            second[r].values[j] = x;
          }
        }
        break;
      }
      case 'missing-cells': {
        const rows = session.products.flatMap(rowsOf);
        const cells = rows.flatMap((row) => attrIdx.map((j) => ({ row, j })));
        const nRemove = Math.max(1, Math.round(fault.size! * cells.length));
        for (const { row, j } of pickDistinct(frng, cells, nRemove)) {
          record(row, j, row.values[j], null);
          row.values[j] = null;
        }
        break;
      }
      case 'out-of-scale':
      case 'decimal-shift': {
        const row = rowsOf(fault.product!)[(fault.replicate ?? 1) - 1];
        let j = attrIdx[0];
        if (movableCell.has(fault) && !((row.values[j] ?? 0) * fault.size! > scale.max)) {
          for (let step = 1; step < nAttributes; step++) {
            const k = (j + step) % nAttributes;
            if ((row.values[k] ?? 0) * fault.size! > scale.max) {
              j = k;
              break;
            }
          }
          fault.attributes = [attributeNames[j]];
          fault.description = describeFault(fault);
        }
        const clean = row.values[j];
        if (clean === null) throw new Error(`A ${fault.kind} fault targets a cell another fault removed.`);
        const fileValue = fault.kind === 'out-of-scale' ? round1(-(clean + 0.5 * fault.size!)) : round1(clean * fault.size!);
        record(row, j, clean, fileValue);
        row.values[j] = fileValue;
        invalidCells.add(`${sampleKey(s, assessor, row.product, row.replicate)}|${j}`);
        break;
      }
      case 'duplicate': {
        const row = rowsOf(fault.product!)[(fault.replicate ?? 1) - 1];
        for (let c = 0; c < fault.size!; c++) duplicates.push({ after: row, copy: { ...row, values: [...row.values] } });
        attributeNames.forEach((_, j) => record(row, j, row.values[j], row.values[j]));
        break;
      }
      default:
        break;
    }
  }

  // ---- missing at random (structure stream): never in a sample a planted fault touched ----
  const touched = new Set(truth.flatMap((f) => f.cells.map((c) => `${c.session}|${c.assessor}|${c.product}|${c.replicate}`)));
  const untouched = samples.filter((row) => !touched.has(`${row.session}|${row.assessor}|${row.product}|${row.replicate}`));
  const missingRate = structure.missingRatingRate ?? 0;
  if (missingRate > 0) {
    for (const row of untouched) row.values.forEach((v, j) => {
      if (v !== null && srng.uniform() < missingRate) row.values[j] = null;
    });
  }
  const droppedSamples = new Set(pickDistinct(srng, untouched, structure.nMissingSamples ?? 0));

  const rawSamples: SampleRow[] = [];
  for (const row of samples) {
    if (droppedSamples.has(row)) continue;
    rawSamples.push(row);
    for (const d of duplicates) if (d.after === row) rawSamples.push(d.copy);
  }
  const toRatings = (rows: SampleRow[], validOnly: boolean): Rating[] => {
    const out: Rating[] = [];
    const seen = new Set<SampleRow>();
    for (const row of rows) {
      if (validOnly && seen.has(row)) continue;
      seen.add(row);
      const key = sampleKey(sessionIndexOf(sessions, row.session), row.assessor, row.product, row.replicate);
      row.values.forEach((value, j) => {
        if (value === null) return;
        if (validOnly && invalidCells.has(`${key}|${j}`)) return;
        out.push({
          session: row.session,
          date: row.date,
          assessor: row.assessor,
          product: row.product,
          replicate: row.replicate,
          attribute: attributeNames[j],
          value,
          code: row.code,
        });
      });
    }
    return out;
  };

  return {
    panelName: opts.panelName,
    scale,
    attributes,
    products: products.map(({ code, name, role }) => ({ code, name, role })),
    assessors,
    sessions,
    ratings: toRatings(samples.filter((row) => !droppedSamples.has(row)), true),
    rawRows: toRatings(rawSamples, false),
    rawSamples,
    truth,
    droppedSamples: samples.filter((row) => droppedSamples.has(row)).map(({ session, assessor, product, replicate }) => ({ session, assessor, product, replicate })),
  };
}

function sessionIndexOf(sessions: GeneratedSession[], label: string): number {
  // Labels are S01, S02, …: the number is the 1-based index.
  const index = Number(label.slice(1)) - 1;
  if (sessions[index]?.label !== label) throw new Error(`Unknown session ${label}.`);
  return index;
}

interface ResolveContext {
  frng: RandomSource;
  nWeeks: number;
  assessorIndex: Map<string, number>;
  productIndex: Map<string, number>;
  attributeNames: string[];
  spreadOrder: string[];
  sessions: GeneratedSession[];
  absent: boolean[][];
  nAttributes: number;
  nReplicates: number;
}

function resolveFault(spec: FaultSpec, ctx: ResolveContext): PlantedFault {
  const { frng, nWeeks, attributeNames } = ctx;
  const kind = spec.kind;
  if (!(FLAG_KINDS as readonly string[]).includes(kind)) throw new Error(`Unknown fault kind "${kind}".`);
  const size = spec.size ?? DEFAULT_FAULT_SIZES[kind];
  const mid = Math.floor(nWeeks / 2);

  let assessor: string | null = spec.assessor ?? null;
  if (kind !== 'unstable-product') {
    if (assessor === null) throw new Error(`A ${kind} fault needs an assessor.`);
    if (!ctx.assessorIndex.has(assessor)) throw new Error(`A ${kind} fault names assessor ${assessor}, who is not on the panel.`);
  } else {
    assessor = null;
  }

  for (const name of spec.attributes ?? []) {
    if (!attributeNames.includes(name)) throw new Error(`A ${kind} fault names attribute "${name}", which is not in the panel.`);
  }

  let fromSession: number;
  let toSession: number;
  if (ONE_SESSION_KINDS.has(kind)) {
    fromSession = spec.fromSession ?? Math.min(nWeeks - 1, 2 + frng.integer(Math.max(1, nWeeks - 2)));
    toSession = fromSession;
  } else {
    fromSession = spec.fromSession ?? (kind === 'drift' || kind === 'unstable-product' ? mid : 0);
    toSession = spec.toSession ?? nWeeks - 1;
  }
  if (!(fromSession >= 0 && toSession < nWeeks && fromSession <= toSession)) {
    throw new Error(`A ${kind} fault has sessions outside 1..${nWeeks}.`);
  }
  const served = ctx.sessions[fromSession].products;

  let product: string | null = spec.product ?? null;
  let otherProduct: string | null = spec.otherProduct ?? null;
  let attributes: string[] | null = spec.attributes ?? null;
  const takeTop = (n: number, pool: string[]) => pickDistinct(frng, pool.slice(0, Math.min(pool.length, 5)), n);
  switch (kind) {
    case 'reversed':
      attributes ??= takeTop(2, ctx.spreadOrder);
      break;
    case 'disagreement':
      attributes ??= takeTop(3, ctx.spreadOrder);
      break;
    case 'unstable-product':
      product ??= RECURRING_PRODUCTS[0];
      attributes ??= takeTop(2, ctx.spreadOrder);
      break;
    case 'straight-lining':
      attributes ??= takeTop(Math.min(size, ctx.nAttributes), ctx.spreadOrder);
      break;
    case 'out-of-scale':
    case 'decimal-shift':
    case 'duplicate':
      product ??= served[frng.integer(served.length)];
      if (kind !== 'duplicate') attributes ??= [attributeNames[frng.integer(attributeNames.length)]];
      else attributes = null;
      break;
    case 'swapped-codes':
      if (product === null || otherProduct === null) {
        // The two served products with the most different true profiles, so a swap is visible.
        let best: [string, string] = [served[0], served[1]];
        let bestDistance = -1;
        for (let i = 0; i < served.length; i++) {
          for (let k = i + 1; k < served.length; k++) {
            const d = profileDistance(SCENARIO_PRODUCTS[ctx.productIndex.get(served[i])!], SCENARIO_PRODUCTS[ctx.productIndex.get(served[k])!], ctx.nAttributes);
            if (d > bestDistance) [best, bestDistance] = [[served[i], served[k]], d];
          }
        }
        [product, otherProduct] = best;
      }
      break;
    default:
      break;
  }
  if (product !== null && !ctx.productIndex.has(product)) throw new Error(`A ${kind} fault names product ${product}, which is not in the range.`);
  if (ONE_SESSION_KINDS.has(kind)) {
    for (const code of [product, otherProduct]) {
      if (code !== null && !served.includes(code)) {
        throw new Error(`A ${kind} fault names product ${code}, which is not served in session ${fromSession + 1}.`);
      }
    }
  }
  if (kind === 'swapped-codes' && product === otherProduct) throw new Error('A swapped-codes fault needs two different products.');
  const replicate = kind === 'swapped-codes' ? (spec.replicate ?? null) : ONE_SESSION_KINDS.has(kind) && kind !== 'missing-cells' && kind !== 'straight-lining' ? (spec.replicate ?? 1) : null;
  if (replicate !== null && !(replicate >= 1 && replicate <= ctx.nReplicates)) throw new Error(`A ${kind} fault names replicate ${replicate}, which the design does not have.`);

  const firstSession = ctx.sessions[fromSession].label;
  const lastSession = ctx.sessions[toSession].label;
  const fault: PlantedFault = {
    kind,
    assessor,
    product: kind === 'swapped-codes' || kind === 'unstable-product' || ['out-of-scale', 'decimal-shift', 'duplicate'].includes(kind) ? product : null,
    otherProduct: kind === 'swapped-codes' ? otherProduct : null,
    attributes: kind === 'missing-cells' ? (spec.attributes ?? null) : attributes,
    fromSession,
    toSession,
    firstSession,
    lastSession,
    size: kind === 'swapped-codes' ? null : size,
    replicate,
    cells: [],
    description: '',
    ...(kind === 'drift' && spec.shape === 'step' ? { shape: 'step' as const } : {}),
  };
  fault.description = describeFault(fault);
  if (!PERSISTENT_ASSESSOR_KINDS.has(kind) && !ONE_SESSION_KINDS.has(kind) && kind !== 'unstable-product') {
    throw new Error(`Fault kind ${kind} cannot be planted.`);
  }
  return fault;
}

function describeFault(f: PlantedFault): string {
  const on = f.attributes === null ? 'every attribute' : f.attributes.join(', ');
  const from = `from ${f.firstSession}`;
  switch (f.kind) {
    case 'lenient':
      return `${f.assessor} rates ${f.size} points higher than the panel on ${on} ${from}.`;
    case 'harsh':
      return `${f.assessor} rates ${f.size} points lower than the panel on ${on} ${from}.`;
    case 'drift':
      return f.shape === 'step'
        ? `${f.assessor}'s ratings step ${f.size! >= 0 ? 'up' : 'down'} by ${Math.abs(f.size!)} points on ${on} ${from}.`
        : `${f.assessor} drifts upward by ${f.size} points per session on ${on} ${from}.`;
    case 'inconsistent':
      return `${f.assessor}'s replicate noise is ${f.size} times the usual on ${on} ${from}.`;
    case 'non-discriminating':
      return `${f.assessor} compresses product differences to ${f.size} of the panel's on ${on} ${from}.`;
    case 'disagreement':
      return `${f.assessor} adds product-specific disagreement (SD ${f.size} × the products' spread) on ${on} ${from}.`;
    case 'reversed':
      return `${f.assessor} ranks products in reverse on ${on} ${from}.`;
    case 'scale-compression':
    case 'scale-expansion':
      return `${f.assessor} uses the scale with scaling coefficient ${f.size} on ${on} ${from}.`;
    case 'unstable-product':
      return `Product ${f.product} changes by ${f.size} points on ${on} ${from}.`;
    case 'swapped-codes':
      return `${f.assessor}'s ratings of ${f.product} and ${f.otherProduct} are exchanged in ${f.firstSession}.`;
    case 'missing-cells':
      return `${f.assessor} misses about ${Math.round(f.size! * 100)} % of their cells in ${f.firstSession}.`;
    case 'straight-lining':
      return `${f.assessor} gives every sample the same rating on ${on} in ${f.firstSession}.`;
    case 'out-of-scale':
      return `${f.assessor}'s rating of ${f.product} on ${on} in ${f.firstSession} is written below the scale.`;
    case 'decimal-shift':
      return `${f.assessor}'s rating of ${f.product} on ${on} in ${f.firstSession} is written ${f.size} times too large.`;
    case 'duplicate':
      return `${f.assessor}'s row for ${f.product} replicate ${f.replicate} in ${f.firstSession} is written twice.`;
    default:
      return `${f.kind} planted.`;
  }
}

function csvField(text: string): string {
  return /[",\r\n]/.test(text) ? `"${text.replace(/"/g, '""')}"` : text;
}

function csvLine(fields: (string | number | null)[]): string {
  return fields.map((f) => (f === null ? '' : csvField(String(f)))).join(',');
}

/** Long form as users' files have it: one rating per line, with the blind code. */
export function toLongCsv(panel: GeneratedPanel): string {
  const lines = [csvLine(['session', 'date', 'assessor', 'product', 'replicate', 'attribute', 'value', 'code'])];
  for (const r of panel.rawRows) lines.push(csvLine([r.session, r.date, r.assessor, r.product, r.replicate, r.attribute, r.value, r.code]));
  return `${lines.join('\n')}\n`;
}

/** Wide form: one served sample per line, one column per attribute, empty = no rating. */
export function toWideCsv(panel: GeneratedPanel): string {
  const lines = [csvLine(['session', 'date', 'assessor', 'product', 'replicate', 'code', ...panel.attributes.map((a) => a.name)])];
  for (const row of panel.rawSamples) {
    lines.push(csvLine([row.session, row.date, row.assessor, row.product, row.replicate, row.code, ...row.values]));
  }
  return `${lines.join('\n')}\n`;
}

/** The panel settings file shape the importer reads (scale, attributes with anchors, products). */
export interface PanelSettingsFile {
  scale: { min: number; max: number };
  attributes: Record<string, { min: number; max: number; anchorLow?: string; anchorHigh?: string }>;
  products: Record<string, { role: 'test' | 'reference'; name?: string }>;
}

export function panelSettings(panel: Pick<GeneratedPanel, 'scale' | 'attributes' | 'products'>): PanelSettingsFile {
  return {
    scale: { ...panel.scale },
    attributes: Object.fromEntries(
      panel.attributes.map((a) => [a.name, { min: a.scaleMin, max: a.scaleMax, anchorLow: a.anchorLow, anchorHigh: a.anchorHigh }]),
    ),
    products: Object.fromEntries(panel.products.map((p) => [p.code, { role: p.role, name: p.name }])),
  };
}

/** Splits a panel into one panel per session (for writing one file per session). */
export function sessionSlices(panel: GeneratedPanel): { session: GeneratedSession; panel: GeneratedPanel }[] {
  return panel.sessions.map((session) => ({
    session,
    panel: {
      ...panel,
      sessions: [session],
      ratings: panel.ratings.filter((r) => r.session === session.label),
      rawRows: panel.rawRows.filter((r) => r.session === session.label),
      rawSamples: panel.rawSamples.filter((r) => r.session === session.label),
      truth: panel.truth.filter((f) => f.fromSession <= sessionIndexOf(panel.sessions, session.label) && sessionIndexOf(panel.sessions, session.label) <= f.toSession),
    },
  }));
}
