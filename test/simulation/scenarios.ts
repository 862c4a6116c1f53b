/**
 * The simulated panels of the flag-detection suite (test/simulation/flag-detection.test.ts): several seeds, 6–12
 * months of weekly sessions, 10–15 assessors, every flag kind planted, and clean assessors.
 *
 * Two designs alternate over the seeds so every kind is planted on several panels without
 * overloading one panel (a panel where most assessors misbehave has no consensus to compare
 * with). One-session data faults are put on assessors that already carry a model fault, so the
 * clean assessors stay wholly clean; they are paired with model faults that leave the fault
 * visible (a swap needs an intact profile, so never on a flattened or reversed assessor).
 */
import type { CleanModel, FaultSpec, PanelScenarioOptions, PanelStructure } from '../../demo/generate-panel.js';

export interface SimulationScenario {
  name: string;
  /** 'one-drifter': a panel whose only fault is one strong drifter (the echo check). */
  family?: 'classic' | 'broad' | 'one-drifter';
  options: PanelScenarioOptions;
  /** Assessors with no planted fault of any kind. */
  cleanAssessors: string[];
}

const code = (i: number) => `A${String(i).padStart(2, '0')}`;

function cleanFrom(first: number, nAssessors: number): string[] {
  return Array.from({ length: nAssessors - first + 1 }, (_, i) => code(first + i));
}

/** Design A: 12 months, 14 assessors, slow drift 0.05/week from mid-year. */
function designA(seed: number): SimulationScenario {
  const nWeeks = 52;
  const mid = 26;
  const faults: FaultSpec[] = [
    { kind: 'lenient', assessor: 'A01', size: 1.5 },
    { kind: 'drift', assessor: 'A02', fromSession: mid, size: 0.05 },
    { kind: 'inconsistent', assessor: 'A03', size: 2.5 },
    { kind: 'reversed', assessor: 'A04' },
    { kind: 'scale-expansion', assessor: 'A05', size: 1.9 },
    { kind: 'disagreement', assessor: 'A06', size: 1 },
    { kind: 'unstable-product', product: 'T01', fromSession: mid, size: 1.5 },
    // One-session data faults, two of each, on the faulty assessors above.
    { kind: 'swapped-codes', assessor: 'A01', fromSession: 9 },
    { kind: 'swapped-codes', assessor: 'A05', fromSession: 40 },
    { kind: 'straight-lining', assessor: 'A03', fromSession: 14 },
    { kind: 'straight-lining', assessor: 'A06', fromSession: 33 },
    { kind: 'missing-cells', assessor: 'A02', fromSession: 7 },
    { kind: 'missing-cells', assessor: 'A04', fromSession: 44 },
    { kind: 'out-of-scale', assessor: 'A03', fromSession: 20 },
    { kind: 'out-of-scale', assessor: 'A05', fromSession: 29 },
    { kind: 'decimal-shift', assessor: 'A01', fromSession: 23 },
    { kind: 'decimal-shift', assessor: 'A06', fromSession: 47 },
    { kind: 'duplicate', assessor: 'A04', fromSession: 12 },
    { kind: 'duplicate', assessor: 'A02', fromSession: 37 },
  ];
  // One-session faults move a little with the seed, so the seeds do not repeat the same sessions.
  for (const f of faults) if (f.fromSession !== undefined && f.kind !== 'drift' && f.kind !== 'unstable-product') f.fromSession += seed % 4;
  return {
    name: `A-seed${seed}`,
    options: { seed, nWeeks, nAssessors: 14, startDate: '2025-01-06', faults },
    cleanAssessors: cleanFrom(7, 14),
  };
}

/** Design B: 6–9 months, 12 assessors, faster drift 0.1/week from mid-period. */
function designB(seed: number, nWeeks: number): SimulationScenario {
  const mid = Math.floor(nWeeks / 2);
  const faults: FaultSpec[] = [
    { kind: 'harsh', assessor: 'A01', size: 1.5 },
    { kind: 'drift', assessor: 'A02', fromSession: mid, size: 0.1 },
    { kind: 'non-discriminating', assessor: 'A03', size: 0.1 },
    { kind: 'scale-compression', assessor: 'A04', size: 0.45 },
    { kind: 'disagreement', assessor: 'A05', size: 1 },
    { kind: 'unstable-product', product: 'T02', fromSession: mid, size: 1.5 },
    { kind: 'swapped-codes', assessor: 'A01', fromSession: 6 },
    { kind: 'swapped-codes', assessor: 'A02', fromSession: mid - 3 },
    { kind: 'straight-lining', assessor: 'A05', fromSession: 10 },
    { kind: 'missing-cells', assessor: 'A04', fromSession: nWeeks - 4 },
    { kind: 'out-of-scale', assessor: 'A01', fromSession: mid + 2 },
    { kind: 'decimal-shift', assessor: 'A04', fromSession: 5 },
    { kind: 'duplicate', assessor: 'A05', fromSession: nWeeks - 2 },
  ];
  for (const f of faults) {
    if (f.fromSession !== undefined && f.kind !== 'drift' && f.kind !== 'unstable-product') f.fromSession = Math.min(nWeeks - 1, f.fromSession + (seed % 3));
  }
  return {
    name: `B-seed${seed}-${nWeeks}w`,
    options: { seed, nWeeks, nAssessors: 12, startDate: '2025-03-03', faults },
    cleanAssessors: cleanFrom(6, 12),
  };
}

/**
 * The broader clean model (drawn independently of the designs above): natural per-attribute
 * assessor offsets of SD 0.45 (within ±1.5) that are not faults, larger assessor × session and
 * product × session terms, an assessor "day" effect shared by all attributes.
 */
export const BROAD_MODEL: Partial<CleanModel> = {
  assessorLevelSd: 0.1,
  assessorAttributeLevelSd: 0.45,
  maxCleanLevelFraction: 0.15,
  assessorSessionSd: 0.25,
  productBatchSd: 0.2,
  sessionShiftSd: 0.35,
};

/** 52 weeks, 14 assessors: A13 joins at week 20, A14 leaves after week 35, four 6-assessor holiday sessions. */
function broadStructure(seed: number): PanelStructure {
  return {
    integerScale: seed % 2 === 1,
    missingRatingRate: 0.03,
    nMissingSamples: 3,
    assessorDaySd: 0.1,
    roster: [
      { assessor: 'A13', fromSession: 19 },
      { assessor: 'A14', toSession: 34 },
    ],
    holidaySessions: [29, 30, 50, 51],
    holidayAssessors: 6,
  };
}

/**
 * Design C: the broad panel with one strong drifter (+0.05 per week from mid-year, +1.3 by the
 * end) and nothing else: every other assessor is clean, so any drift flag on them is an echo.
 */
function designC(seed: number): SimulationScenario {
  return {
    name: `C-seed${seed}-one-drifter`,
    family: 'one-drifter',
    options: {
      seed,
      nWeeks: 52,
      nAssessors: 14,
      startDate: '2025-01-06',
      faults: [{ kind: 'drift', assessor: 'A01', fromSession: 26, size: 0.05 }],
      model: BROAD_MODEL,
      structure: broadStructure(seed),
    },
    cleanAssessors: cleanFrom(2, 14),
  };
}

const ALWAYS_SERVED = ['REF', 'T01', 'T02', 'T03'];

/**
 * Design D: the broad panel with step shifts (+/−1.5 to 2.5 points on every attribute at one
 * session), whole-session swaps of two always-served products chosen by the seed (not the most
 * different pair), a lenient and an inconsistent assessor, and a clean majority.
 */
function designD(seed: number): SimulationScenario {
  const pairs = ALWAYS_SERVED.flatMap((p, i) => ALWAYS_SERVED.slice(i + 1).map((q) => [p, q] as const));
  const pair = (k: number) => pairs[(seed + k) % pairs.length];
  const stepSize = [2.5, -2, 1.5, 2][seed % 4];
  const stepAt = 22 + (seed % 6);
  const faults: FaultSpec[] = [
    { kind: 'drift', assessor: 'A01', fromSession: stepAt, size: stepSize, shape: 'step' },
    { kind: 'drift', assessor: 'A02', fromSession: 40 - (seed % 5), size: -stepSize, shape: 'step' },
    { kind: 'lenient', assessor: 'A03', size: 1.5 },
    { kind: 'inconsistent', assessor: 'A04', size: 2.5 },
    { kind: 'swapped-codes', assessor: 'A03', fromSession: 8 + (seed % 5), product: pair(0)[0], otherProduct: pair(0)[1] },
    { kind: 'swapped-codes', assessor: 'A04', fromSession: 16 + (seed % 3), product: pair(2)[0], otherProduct: pair(2)[1] },
    { kind: 'swapped-codes', assessor: 'A01', fromSession: 44 + (seed % 4), product: pair(4)[0], otherProduct: pair(4)[1] },
  ];
  return {
    name: `D-seed${seed}-broad`,
    family: 'broad',
    options: { seed, nWeeks: 52, nAssessors: 14, startDate: '2025-01-06', faults, model: BROAD_MODEL, structure: broadStructure(seed) },
    cleanAssessors: cleanFrom(5, 14),
  };
}

/** The broad scenarios: designs C and D over several seeds (14 panel-years). */
export function broadScenarios(): SimulationScenario[] {
  return [designC(11), designD(12), designC(13), designD(14), designC(15), designD(16), designC(17), designD(18), designD(19), designC(21), designD(22), designD(23), designC(25), designD(26)];
}

/** The fixed suite: two designs × several seeds (deterministic). */
export function simulationScenarios(): SimulationScenario[] {
  return [
    designA(101),
    designB(202, 26),
    designA(303),
    designB(404, 39),
    designA(505),
    designB(606, 30),
    designA(707),
    designB(808, 35),
    designA(909),
    designB(1010, 28),
  ];
}
