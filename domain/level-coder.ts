/**
 * Codes the values of one key column (session labels, assessors, products, replicate numbers…)
 * 0, 1, 2, … in first-seen order: the one coder the reader, the import, the analyze duplicate
 * check and the model frame share. The only code in domain/ besides types and constant lists
 * (DEVELOPERS.md): it is small, has no dependencies and every stage needs the same one.
 *
 * `reserved` takes code 0 without being a level (the import's ids keep 0 for "none"); it is
 * never returned by `code`. Consecutive rows mostly repeat a value, or give the one that followed
 * it last time (files repeat their order of attributes, codes and assessors): a comparison or two
 * instead of hashing.
 */
export class LevelCoder<T extends string | number = string> {
  /** names[code] = the value; with `reserved`, names[0] is that placeholder. */
  readonly names: T[] = [];
  private readonly codes = new Map<T, number>();
  /** follower[code + 1] = the code that followed `code` last time (-1 none); [0] after no code. */
  private readonly follower: number[] = [-1];
  private fresh: T[] = [];
  private lastCode = -1;

  constructor(reserved?: T) {
    if (reserved !== undefined) {
      this.names.push(reserved);
      this.follower.push(-1);
    }
  }

  /** Number of codes handed out, the reserved one included. */
  get size(): number {
    return this.names.length;
  }

  code(value: T): number {
    const last = this.lastCode;
    if (last >= 0 && this.names[last] === value) return last;
    const guess = this.follower[last + 1];
    let code = guess >= 0 && this.names[guess] === value ? guess : this.codes.get(value);
    if (code === undefined) {
      code = this.names.length;
      this.codes.set(value, code);
      this.names.push(value);
      this.follower.push(-1);
      this.fresh.push(value);
    }
    this.follower[last + 1] = code;
    this.lastCode = code;
    return code;
  }

  /** Codes each value in turn (a list handed on by another coder's `takeFresh`). */
  codeAll(values: readonly T[]): void {
    for (const value of values) this.code(value);
  }

  /** The code of a value already seen, without coding it. */
  find(value: T): number | undefined {
    return this.codes.get(value);
  }

  /** The values first coded since the last call, in code order. */
  takeFresh(): T[] {
    const fresh = this.fresh;
    this.fresh = [];
    return fresh;
  }
}
