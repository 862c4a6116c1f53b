/**
 * Stage 1 of a fit: the model frame. Turns rows into level indices and the sufficient
 * statistics of a variance-component model
 *
 *     y = Xβ + Σ_k Z_k u_k + e,   u_k ~ N(0, σ²_k I),  e ~ N(0, σ² I)
 *
 * with X = intercept + treatment-coded fixed factor (first level in sorted order is the
 * reference, as R's factor() in the C locale) and Z_k the indicator matrix of random-intercept
 * term k (a factor or an interaction of factors, e.g. assessor:product). Nothing N×N is
 * formed: the criterion needs only ZᵀZ (stored in block-arrow form), ZᵀX, Zᵀy, XᵀX, Xᵀy, yᵀy.
 */
import { makeBlockArrowLayout, type BlockArrowLayout } from '../linalg/block-arrow.js';

export interface ModelFrameInput {
  /** The response, one value per observation. */
  response: ArrayLike<number>;
  /** Factor columns by name (e.g. assessor, product, session), one string per observation. */
  columns: Record<string, readonly string[]>;
  /** Name of the fixed factor (treatment coded). */
  fixedFactor: string;
  /** Random-intercept terms, each a list of factor names (['assessor', 'product'] is assessor:product). */
  randomTerms: readonly (readonly string[])[];
}

export interface RandomTerm {
  /** R-style label, e.g. "assessor:product". */
  name: string;
  factors: string[];
  /** Level labels (factor values joined by ':'), in the order of their factors' sorted levels. */
  levels: string[];
  /** Level index of each observation. */
  index: Int32Array;
}

export interface ModelFrame {
  nObservations: number;
  /** Number of fixed-effect columns (intercept + levels − 1). */
  nFixed: number;
  fixedFactor: string;
  fixedLevels: string[];
  fixedIndex: Int32Array;
  response: Float64Array;
  /** Mean of the response; the criterion works on the centred response for accuracy. */
  responseCentre: number;
  terms: RandomTerm[];
  /** Factor whose levels split the random effects into independent blocks (null: one dense block). */
  blockingFactor: string | null;
  layout: BlockArrowLayout;
  /** positionOf[k][level] = row of that random effect in the block-arrow order. */
  positionOf: Int32Array[];
  /** Term index of each row in the block-arrow order. */
  termOfPosition: Int32Array;
  /** ZᵀZ in block-arrow form (counts, full symmetric blocks). */
  zTzBlocks: Float64Array[];
  zTzCouplings: Float64Array[];
  zTzBorder: Float64Array;
  /** ZᵀX, q × p row-major. */
  zTx: Float64Array;
  /** Zᵀ(y − centre). */
  zTy: Float64Array;
  /** XᵀX, p × p row-major. */
  xTx: Float64Array;
  /** Xᵀ(y − centre). */
  xTy: Float64Array;
  /** (y − centre)ᵀ(y − centre). */
  yTy: number;
}

/** Code-unit order: the same as R's sort(method = "radix"), i.e. the C locale. */
export function compareLevels(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}

export function buildModelFrame(input: ModelFrameInput): ModelFrame {
  const n = input.response.length;
  const response = Float64Array.from(input.response);
  if (n === 0) throw new Error('no observations to fit');
  for (const value of response) if (!Number.isFinite(value)) throw new Error('the response has a missing or non-finite value');
  const column = (name: string): readonly string[] => {
    const values = input.columns[name];
    if (!values || values.length !== n) throw new Error(`factor column "${name}" is missing or has the wrong length`);
    return values;
  };

  // Each factor coded once: sorted levels and the level index of every observation.
  const coded = new Map<string, { levels: string[]; codes: Int32Array }>();
  const codeFactor = (name: string): { levels: string[]; codes: Int32Array } => {
    let entry = coded.get(name);
    if (!entry) {
      const values = column(name);
      const levels = [...new Set(values)].sort(compareLevels);
      const index = new Map(levels.map((level, position) => [level, position]));
      const codes = new Int32Array(n);
      for (let i = 0; i < n; i++) codes[i] = index.get(values[i])!;
      entry = { levels, codes };
      coded.set(name, entry);
    }
    return entry;
  };

  const fixedCoded = codeFactor(input.fixedFactor);
  const fixedLevels = fixedCoded.levels;
  const fixedIndex = fixedCoded.codes;
  const p = fixedLevels.length;

  // Interaction levels are the combinations present, ordered by their factors' level order
  // (the order is internal: results do not depend on it). factorValueOfLevel[k][factor][level]
  // is the value of that factor for each level of term k.
  const factorValueOfLevel: Record<string, string[]>[] = [];
  const terms: RandomTerm[] = input.randomTerms.map((factors) => {
    const parts = factors.map(codeFactor);
    const combined = new Float64Array(n);
    let keySpace = 1;
    for (const part of parts) keySpace *= part.levels.length;
    for (let i = 0; i < n; i++) {
      let key = 0;
      for (const part of parts) key = key * part.levels.length + part.codes[i];
      combined[i] = key;
    }
    const index = new Int32Array(n);
    let distinct: number[];
    if (keySpace <= 4 * n + 4096) {
      // Small key space (the usual case): a lookup table instead of a hash map.
      const levelOfKey = new Int32Array(keySpace).fill(-1);
      for (let i = 0; i < n; i++) levelOfKey[combined[i]] = 0;
      distinct = [];
      for (let key = 0; key < keySpace; key++) if (levelOfKey[key] === 0) levelOfKey[key] = distinct.push(key) - 1;
      for (let i = 0; i < n; i++) index[i] = levelOfKey[combined[i]];
    } else {
      distinct = [...new Set(combined)].sort((a, b) => a - b);
      const levelOfKey = new Map(distinct.map((key, level) => [key, level]));
      for (let i = 0; i < n; i++) index[i] = levelOfKey.get(combined[i])!;
    }
    // Decode each level's key once into its factor values and its label ("A01:101").
    const byFactor: Record<string, string[]> = {};
    const valuesOfFactor = factors.map((factor) => (byFactor[factor] = new Array<string>(distinct.length)));
    const levels = new Array<string>(distinct.length);
    for (let level = 0; level < distinct.length; level++) {
      let key = distinct[level];
      let label = '';
      for (let f = parts.length - 1; f >= 0; f--) {
        const size = parts[f].levels.length;
        const value = parts[f].levels[key % size];
        valuesOfFactor[f][level] = value;
        label = f === parts.length - 1 ? value : `${value}:${label}`;
        key = Math.floor(key / size);
      }
      levels[level] = label;
    }
    factorValueOfLevel.push(byFactor);
    return { name: factors.join(':'), factors: [...factors], levels, index };
  });

  const blockingFactor = chooseBlockingFactor(terms, factorValueOfLevel);
  const { layout, positionOf, termOfPosition } = layoutPositions(terms, factorValueOfLevel, blockingFactor);

  const q = layout.size;
  const blockOfPosition = new Int32Array(q).fill(-1);
  const localOfPosition = new Int32Array(q);
  layout.blockSizes.forEach((size, b) => {
    for (let i = 0; i < size; i++) {
      blockOfPosition[layout.blockOffsets[b] + i] = b;
      localOfPosition[layout.blockOffsets[b] + i] = i;
    }
  });
  for (let i = layout.borderOffset; i < q; i++) localOfPosition[i] = i - layout.borderOffset;

  const nB = layout.borderSize;
  const zTzBlocks = layout.blockSizes.map((size) => new Float64Array(size * size));
  const zTzCouplings = layout.blockSizes.map((size) => new Float64Array(size * nB));
  const zTzBorder = new Float64Array(nB * nB);
  const zTx = new Float64Array(q * p);
  const zTy = new Float64Array(q);
  const xTx = new Float64Array(p * p);
  const xTy = new Float64Array(p);

  let responseCentre = 0;
  for (const value of response) responseCentre += value;
  responseCentre /= n;
  let yTy = 0;

  const positions = new Int32Array(terms.length);
  for (let i = 0; i < n; i++) {
    const y = response[i] - responseCentre;
    yTy += y * y;
    const fixedColumn = fixedIndex[i];
    xTx[0] += 1;
    xTy[0] += y;
    if (fixedColumn > 0) {
      xTx[fixedColumn] += 1;
      xTx[fixedColumn * p] += 1;
      xTx[fixedColumn * p + fixedColumn] += 1;
      xTy[fixedColumn] += y;
    }
    for (let k = 0; k < terms.length; k++) {
      const position = positionOf[k][terms[k].index[i]];
      positions[k] = position;
      zTy[position] += y;
      zTx[position * p] += 1;
      if (fixedColumn > 0) zTx[position * p + fixedColumn] += 1;
    }
    for (let k = 0; k < terms.length; k++) {
      const row = positions[k];
      for (let m = 0; m < terms.length; m++) {
        const col = positions[m];
        const rowBlock = blockOfPosition[row];
        const colBlock = blockOfPosition[col];
        if (rowBlock >= 0 && colBlock >= 0) {
          if (rowBlock !== colBlock) throw new Error('internal: random effects of two blocks share an observation');
          zTzBlocks[rowBlock][localOfPosition[row] * layout.blockSizes[rowBlock] + localOfPosition[col]] += 1;
        } else if (rowBlock >= 0) {
          zTzCouplings[rowBlock][localOfPosition[row] * nB + localOfPosition[col]] += 1;
        } else if (colBlock < 0) {
          zTzBorder[localOfPosition[row] * nB + localOfPosition[col]] += 1;
        }
      }
    }
  }

  return {
    nObservations: n,
    nFixed: p,
    fixedFactor: input.fixedFactor,
    fixedLevels,
    fixedIndex,
    response,
    responseCentre,
    terms,
    blockingFactor,
    layout,
    positionOf,
    termOfPosition,
    zTzBlocks,
    zTzCouplings,
    zTzBorder,
    zTx,
    zTy,
    xTx,
    xTy,
    yTy,
  };
}

/**
 * Picks the factor whose levels split the most work into independent blocks: every term that
 * contains it is nested in its levels (e.g. session for session, assessor:session and
 * product:session); the other terms form the dense border. The estimated Cholesky cost decides.
 */
function chooseBlockingFactor(terms: RandomTerm[], factorValueOfLevel: Record<string, string[]>[]): string | null {
  const totalSize = terms.reduce((sum, term) => sum + term.levels.length, 0);
  let best: string | null = null;
  let bestCost = totalSize ** 3 / 3;
  const candidates = [...new Set(terms.flatMap((term) => term.factors))].sort(compareLevels);
  for (const factor of candidates) {
    const blockSizes = new Map<string, number>();
    let borderSize = 0;
    terms.forEach((term, k) => {
      if (!term.factors.includes(factor)) {
        borderSize += term.levels.length;
        return;
      }
      for (const value of factorValueOfLevel[k][factor]) blockSizes.set(value, (blockSizes.get(value) ?? 0) + 1);
    });
    let cost = borderSize ** 3 / 3;
    for (const size of blockSizes.values()) cost += size ** 3 / 3 + size * size * borderSize + size * borderSize * borderSize;
    if (cost < bestCost) {
      bestCost = cost;
      best = factor;
    }
  }
  return best;
}

function layoutPositions(
  terms: RandomTerm[],
  factorValueOfLevel: Record<string, string[]>[],
  blockingFactor: string | null,
): { layout: BlockArrowLayout; positionOf: Int32Array[]; termOfPosition: Int32Array } {
  const positionOf = terms.map((term) => new Int32Array(term.levels.length));
  const q = terms.reduce((sum, term) => sum + term.levels.length, 0);
  const termOfPosition = new Int32Array(q);
  const blockSizes: number[] = [];
  let next = 0;
  const place = (k: number, level: number): void => {
    positionOf[k][level] = next;
    termOfPosition[next++] = k;
  };
  if (blockingFactor !== null) {
    // Largest nested term first: its own ZᵀZ block is diagonal, so it causes no fill and its
    // rows of W_b = L_b⁻¹ C_b stay as sparse as its coupling rows.
    const blockTerms = terms
      .map((term, k) => k)
      .filter((k) => terms[k].factors.includes(blockingFactor))
      .sort((a, b) => terms[b].levels.length - terms[a].levels.length || a - b);
    // Blocks in sorted order of the blocking factor's values; within a block, terms in the
    // order above and levels in level order (a counting sort: one pass to size, one to place).
    const blockOf = new Map<string, number>();
    for (const k of blockTerms) for (const value of factorValueOfLevel[k][blockingFactor]) blockOf.set(value, -1);
    [...blockOf.keys()].sort(compareLevels).forEach((value, b) => {
      blockOf.set(value, b);
      blockSizes.push(0);
    });
    const blockOfLevel = blockTerms.map((k) => Int32Array.from(factorValueOfLevel[k][blockingFactor], (value) => blockOf.get(value)!));
    for (const blocks of blockOfLevel) for (const b of blocks) blockSizes[b]++;
    const cursor = new Int32Array(blockSizes.length);
    for (let b = 1; b < blockSizes.length; b++) cursor[b] = cursor[b - 1] + blockSizes[b - 1];
    blockTerms.forEach((k, t) => {
      const blocks = blockOfLevel[t];
      for (let level = 0; level < blocks.length; level++) {
        const position = cursor[blocks[level]]++;
        positionOf[k][level] = position;
        termOfPosition[position] = k;
      }
    });
    next = blockSizes.reduce((sum, size) => sum + size, 0);
  }
  let borderSize = 0;
  terms.forEach((term, k) => {
    if (blockingFactor !== null && term.factors.includes(blockingFactor)) return;
    for (let level = 0; level < term.levels.length; level++) place(k, level);
    borderSize += term.levels.length;
  });
  return { layout: makeBlockArrowLayout(blockSizes, borderSize), positionOf, termOfPosition };
}
