/**
 * A small seeded random source for the demo and the simulation suite. Pure: the same seed gives
 * the same sequence on every platform (32-bit integer arithmetic only, no Math.random).
 */

export interface RandomSource {
  /** Uniform on [0, 1). */
  uniform(): number;
  /** Standard normal N(0, 1). */
  normal(): number;
  /** Uniform integer in [0, n). */
  integer(n: number): number;
}

/**
 * mulberry32 (Tommy Ettinger's public-domain 32-bit generator, common practice for seeded
 * test data, no source) with Box–Muller normals (Box & Muller 1958, Ann. Math. Statist. 29).
 */
export function createRandom(seed: number): RandomSource {
  let state = seed >>> 0;
  let spareNormal: number | null = null;
  const uniform = (): number => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  const normal = (): number => {
    if (spareNormal !== null) {
      const value = spareNormal;
      spareNormal = null;
      return value;
    }
    // 1 − u avoids log(0); u in [0, 1) so 1 − u in (0, 1].
    const radius = Math.sqrt(-2 * Math.log(1 - uniform()));
    const angle = 2 * Math.PI * uniform();
    spareNormal = radius * Math.sin(angle);
    return radius * Math.cos(angle);
  };
  const integer = (n: number): number => Math.floor(uniform() * n);
  return { uniform, normal, integer };
}

/** Derives an independent stream seed from a base seed and a stream number (splitmix-style mix). */
export function streamSeed(seed: number, stream: number): number {
  let h = (seed ^ Math.imul(stream + 1, 0x9e3779b9)) >>> 0;
  h = Math.imul(h ^ (h >>> 16), 0x85ebca6b) >>> 0;
  h = Math.imul(h ^ (h >>> 13), 0xc2b2ae35) >>> 0;
  return (h ^ (h >>> 16)) >>> 0;
}
