/**
 * Seeded pseudo-random numbers for tests: mulberry32 (a 32-bit generator, public domain by
 * Tommy Ettinger's description, common practice) and Box–Muller normals. Not for cryptography.
 */
export interface Random {
  uniform(): number;
  normal(mean?: number, sd?: number): number;
  integer(maxExclusive: number): number;
}

export function seededRandom(seed: number): Random {
  let state = seed >>> 0;
  let spare: number | null = null;
  const uniform = (): number => {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  const normal = (mean = 0, sd = 1): number => {
    if (spare !== null) {
      const value = spare;
      spare = null;
      return mean + sd * value;
    }
    let u = 0;
    while (u === 0) u = uniform();
    const v = uniform();
    const radius = Math.sqrt(-2 * Math.log(u));
    spare = radius * Math.sin(2 * Math.PI * v);
    return mean + sd * radius * Math.cos(2 * Math.PI * v);
  };
  return { uniform, normal, integer: (maxExclusive) => Math.floor(uniform() * maxExclusive) };
}
