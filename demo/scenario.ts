/**
 * The invented demo scenario: the descriptive panel of a small dairy-alternative plant that
 * makes a range of oat-based yoghurts. Names are fictional and brand-free. True product
 * profiles are on the 0–10 line scale of every attribute.
 */

export interface ScenarioAttribute {
  name: string;
  scaleMin: number;
  scaleMax: number;
  anchorLow: string;
  anchorHigh: string;
}

export interface ScenarioProduct {
  code: string;
  name: string;
  role: 'test' | 'reference';
  /** True profile, one value per attribute of SCENARIO_ATTRIBUTES, in the same order. */
  profile: number[];
}

export const SCENARIO_PANEL_NAME = 'Oat yoghurt sensory panel';

export const SCENARIO_ATTRIBUTES: readonly ScenarioAttribute[] = [
  { name: 'sourness', scaleMin: 0, scaleMax: 10, anchorLow: 'not sour', anchorHigh: 'very sour' },
  { name: 'sweetness', scaleMin: 0, scaleMax: 10, anchorLow: 'not sweet', anchorHigh: 'very sweet' },
  { name: 'oat flavour', scaleMin: 0, scaleMax: 10, anchorLow: 'none', anchorHigh: 'very strong' },
  { name: 'vanilla flavour', scaleMin: 0, scaleMax: 10, anchorLow: 'none', anchorHigh: 'very strong' },
  { name: 'cardboard off-flavour', scaleMin: 0, scaleMax: 10, anchorLow: 'none', anchorHigh: 'very strong' },
  { name: 'thickness', scaleMin: 0, scaleMax: 10, anchorLow: 'thin, runny', anchorHigh: 'very thick' },
  { name: 'creaminess', scaleMin: 0, scaleMax: 10, anchorLow: 'watery', anchorHigh: 'very creamy' },
  { name: 'graininess', scaleMin: 0, scaleMax: 10, anchorLow: 'smooth', anchorHigh: 'very grainy' },
  { name: 'astringency', scaleMin: 0, scaleMax: 10, anchorLow: 'none', anchorHigh: 'very astringent' },
  { name: 'bitter aftertaste', scaleMin: 0, scaleMax: 10, anchorLow: 'none', anchorHigh: 'very strong' },
];

// Profiles: sour, sweet, oat, vanilla, cardboard, thick, creamy, grainy, astringent, bitter.
export const SCENARIO_PRODUCTS: readonly ScenarioProduct[] = [
  { code: 'REF', name: 'Plain, standard recipe (control)', role: 'reference', profile: [5.0, 4.0, 5.5, 0.8, 1.5, 5.0, 5.0, 2.5, 3.0, 1.8] },
  { code: 'T01', name: 'Plain, reduced sugar', role: 'test', profile: [5.8, 2.2, 6.0, 0.6, 1.8, 4.8, 4.5, 2.6, 3.4, 2.4] },
  { code: 'T02', name: 'Vanilla', role: 'test', profile: [4.2, 6.3, 4.5, 6.5, 1.2, 5.2, 5.8, 2.2, 2.4, 1.2] },
  { code: 'T03', name: 'Plain, high protein', role: 'test', profile: [5.2, 3.6, 4.8, 0.7, 2.8, 6.8, 4.2, 4.8, 4.6, 3.5] },
  { code: 'T04', name: 'Vanilla, new oat base', role: 'test', profile: [4.0, 6.0, 6.8, 5.8, 1.6, 4.6, 5.4, 2.9, 2.6, 1.5] },
  { code: 'T05', name: 'Thick strained style', role: 'test', profile: [6.2, 3.2, 4.2, 0.5, 1.4, 8.2, 7.4, 1.8, 2.8, 1.6] },
  { code: 'T06', name: 'Plain, pea-protein blend', role: 'test', profile: [4.8, 3.8, 3.6, 0.6, 3.6, 5.6, 4.6, 5.6, 5.2, 4.4] },
  { code: 'T07', name: 'Coconut blend', role: 'test', profile: [3.6, 5.2, 3.0, 1.5, 1.0, 6.0, 7.8, 1.5, 1.8, 1.0] },
];

/** Served every session after the reference, in this order. */
export const RECURRING_PRODUCTS = ['T01', 'T02', 'T03'] as const;
/** Served in rotation, one more each week as the session size allows. */
export const ROTATING_PRODUCTS = ['T04', 'T05', 'T06', 'T07'] as const;

/**
 * Spreads of the clean model, in scale points (SDs). Chosen to resemble a well-trained panel on
 * a 0–10 line scale: replicate SD about 0.45, assessor×product disagreement about 0.3
 * (common practice ranges for trained panels, no source).
 */
export const CLEAN_MODEL = {
  sessionShiftSd: 0.3,
  assessorSessionSd: 0.15,
  productBatchSd: 0.08,
  assessorLevelSd: 0.15,
  assessorAttributeLevelSd: 0.2,
  /** Clean assessors' level offsets are kept within ±5 % of the scale range. */
  maxCleanLevelFraction: 0.05,
  scalingLogSd: 0.08,
  minCleanScaling: 0.85,
  maxCleanScaling: 1.18,
  persistentDisagreementSd: 0.2,
  sessionDisagreementSd: 0.2,
  replicateSd: 0.45,
  noiseMultiplierLogSd: 0.1,
  minNoiseMultiplier: 0.85,
  maxNoiseMultiplier: 1.18,
} as const;
