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
import type { FaultSpec, PanelScenarioOptions } from '../../demo/generate-panel.js';

export interface SimulationScenario {
  name: string;
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
