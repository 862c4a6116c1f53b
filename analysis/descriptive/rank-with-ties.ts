/**
 * Ranks 1..n of the values, ties sharing the average of the ranks they span ("midranks"),
 * as R's rank(x, ties.method = "average"). Also returns Σ (t³ − t) over tie groups, the
 * tie correction of Kendall's W and Friedman's test. `tolerance` (absolute, default 0) lets values
 * that differ only by rounding count as tied: cell means such as (12.1 + 13.5)/2 and
 * (13.2 + 12.4)/2 are equal on paper but can differ in the last bit.
 * @example rankWithTies([10, 20, 20, 30]) // { ranks: [1, 2.5, 2.5, 4], tieSum: 6 }
 */
export function rankWithTies(values: readonly number[], tolerance = 0): { ranks: number[]; tieSum: number } {
  const order = values.map((value, index) => ({ value, index })).sort((a, b) => a.value - b.value);
  const ranks = new Array<number>(values.length);
  let tieSum = 0;
  let start = 0;
  while (start < order.length) {
    let end = start + 1;
    while (end < order.length && order[end].value - order[start].value <= tolerance) end++;
    const averageRank = (start + 1 + end) / 2;
    for (let i = start; i < end; i++) ranks[order[i].index] = averageRank;
    const tieSize = end - start;
    tieSum += tieSize * tieSize * tieSize - tieSize;
    start = end;
  }
  return { ranks, tieSum };
}
