/**
 * Balanced multiway number partitioning: n = S·P numbers into S groups of exactly P, with the
 * group sums as equal as possible. Pure.
 *
 * 1. The balanced largest differencing method (Michiels, Korst, Aarts, van Leeuwen and
 *    Spieksma, "Performance ratios for the differencing method applied to the balanced number
 *    partitioning problem", 2003), the balanced form of Karmarkar and Karp's differencing
 *    (1982): the numbers, sorted, are cut into P blocks of S; each block is a partial partition
 *    with one number per group; the two partial partitions with the largest difference
 *    (largest minus smallest group sum) are merged, largest group of one with smallest of the
 *    other, until one is left. Every group takes one number from each block, so every group
 *    has P.
 * 2. Improvement by pairwise swaps (one number of a group for one of another, which keeps the
 *    counts): the group with the largest sum, then the one with the smallest, trades with the
 *    others for the swap that brings the two sums closest; every swap lowers the sum of squared
 *    group sums, so the loop ends.
 * 3. A second swap pass evens a secondary figure (the groups' summed conductance, 1/R), taking
 *    only swaps that keep every group sum within the range the first two steps reached.
 */

export interface PartitionOptions {
  /** Secondary figure per number, evened without widening the primary range. */
  secondary?: readonly number[];
  /** Swap rounds of each improvement pass. @default 10 × n */
  maxRounds?: number;
}

interface Partial {
  sums: number[];
  items: number[][];
  diff: number;
}

function spreadOf(sums: readonly number[]): number {
  let lo = Infinity;
  let hi = -Infinity;
  for (const s of sums) {
    if (s < lo) lo = s;
    if (s > hi) hi = s;
  }
  return hi - lo;
}

function merge(a: Partial, b: Partial): Partial {
  const ai = a.sums.map((_, i) => i).sort((x, y) => a.sums[y]! - a.sums[x]!);
  const bi = b.sums.map((_, i) => i).sort((x, y) => b.sums[x]! - b.sums[y]!);
  const sums: number[] = [];
  const items: number[][] = [];
  for (let k = 0; k < ai.length; k++) {
    const i = ai[k]!;
    const j = bi[k]!;
    sums.push(a.sums[i]! + b.sums[j]!);
    items.push(a.items[i]!.concat(b.items[j]!));
  }
  return { sums, items, diff: spreadOf(sums) };
}

/** Step 1: group index lists (S groups of P) by balanced largest differencing. */
export function balancedDifferencing(values: readonly number[], groups: number): number[][] {
  const order = values.map((_, i) => i).sort((x, y) => values[y]! - values[x]!);
  const partials: Partial[] = [];
  for (let start = 0; start < order.length; start += groups) {
    const block = order.slice(start, start + groups);
    const sums = block.map((i) => values[i]!);
    partials.push({ sums, items: block.map((i) => [i]), diff: spreadOf(sums) });
  }
  while (partials.length > 1) {
    // The two largest differences, found by one scan (P is at most a few hundred).
    let first = 0;
    let second = -1;
    for (let i = 1; i < partials.length; i++) {
      if (partials[i]!.diff > partials[first]!.diff) {
        second = first;
        first = i;
      } else if (second < 0 || partials[i]!.diff > partials[second]!.diff) second = i;
    }
    const merged = merge(partials[first]!, partials[second]!);
    const [hi, lo] = first > second ? [first, second] : [second, first];
    partials.splice(hi, 1);
    partials.splice(lo, 1, merged);
  }
  return partials[0]?.items ?? [];
}

/**
 * The best single swap between groups a and b for the figure `v`: the pair whose exchange moves
 * an amount strictly between 0 and the gap, as close to half the gap as possible. `allowed`
 * may refuse a pair (the secondary pass keeps the primary range).
 */
function bestSwap(
  ga: readonly number[],
  gb: readonly number[],
  v: readonly number[],
  gap: number,
  allowed: ((x: number, y: number) => boolean) | null,
): [number, number] | null {
  const target = gap / 2;
  let best: [number, number] | null = null;
  let bestMiss = Infinity;
  if (allowed === null) {
    // Sorted b and a binary search per member of a: O(P log P).
    const sortedB = [...gb].sort((x, y) => v[x]! - v[y]!);
    for (const x of ga) {
      const want = v[x]! - target;
      let lo = 0;
      let hi = sortedB.length;
      while (lo < hi) {
        const mid = (lo + hi) >> 1;
        if (v[sortedB[mid]!]! < want) lo = mid + 1;
        else hi = mid;
      }
      for (const k of [lo - 1, lo]) {
        const y = sortedB[k];
        if (y === undefined) continue;
        const d = v[x]! - v[y]!;
        if (d <= 0 || d >= gap) continue;
        const miss = Math.abs(d - target);
        if (miss < bestMiss) {
          bestMiss = miss;
          best = [x, y];
        }
      }
    }
    return best;
  }
  for (const x of ga) {
    for (const y of gb) {
      const d = v[x]! - v[y]!;
      if (d <= 0 || d >= gap) continue;
      const miss = Math.abs(d - target);
      if (miss < bestMiss && allowed(x, y)) {
        bestMiss = miss;
        best = [x, y];
      }
    }
  }
  return best;
}

function sumsOf(groups: readonly number[][], v: readonly number[]): number[] {
  return groups.map((g) => g.reduce((s, i) => s + v[i]!, 0));
}

/** One improving swap of the group with the largest (then smallest) sum, or false. */
function swapOnce(
  groups: number[][],
  v: readonly number[],
  sums: number[],
  allowed: ((a: number, b: number, x: number, y: number) => boolean) | null,
): boolean {
  const order = sums.map((_, i) => i).sort((x, y) => sums[x]! - sums[y]!);
  const top = order[order.length - 1]!;
  const bottom = order[0]!;
  const pairs: Array<[number, number]> = [
    ...order.slice(0, -1).map((b): [number, number] => [top, b]),
    ...order
      .slice(1)
      .reverse()
      .map((a): [number, number] => [a, bottom]),
  ];
  for (const [a, b] of pairs) {
    const gap = sums[a]! - sums[b]!;
    if (!(gap > 0)) continue;
    const swap = bestSwap(
      groups[a]!,
      groups[b]!,
      v,
      gap,
      allowed === null ? null : (x, y) => allowed(a, b, x, y),
    );
    if (swap === null) continue;
    const [x, y] = swap;
    const ia = groups[a]!.indexOf(x);
    const ib = groups[b]!.indexOf(y);
    groups[a]![ia] = y;
    groups[b]![ib] = x;
    const d = v[x]! - v[y]!;
    sums[a] = sums[a]! - d;
    sums[b] = sums[b]! + d;
    return true;
  }
  return false;
}

/** Steps 2 and 3 on groups made elsewhere (modified in place and returned). */
export function improveBySwaps(
  groups: number[][],
  values: readonly number[],
  options: PartitionOptions = {},
): number[][] {
  const n = values.length;
  const rounds = options.maxRounds ?? 10 * n;
  const sums = sumsOf(groups, values);
  for (let r = 0; r < rounds && swapOnce(groups, values, sums, null); r++);
  const second = options.secondary;
  if (second === undefined) return groups;
  let lo = Math.min(...sums);
  let hi = Math.max(...sums);
  // Floating-point room, so that a swap of two equal values is not refused for a last-bit change.
  const slack = 1e-12 * Math.max(1, Math.abs(hi));
  lo -= slack;
  hi += slack;
  const ssums = sumsOf(groups, second);
  const keepsRange = (a: number, b: number, x: number, y: number): boolean => {
    const d = values[x]! - values[y]!;
    const na = sums[a]! - d;
    const nb = sums[b]! + d;
    return na >= lo && na <= hi && nb >= lo && nb <= hi;
  };
  for (let r = 0; r < rounds; r++) {
    const before = groups.map((g) => [...g]);
    if (!swapOnce(groups, second, ssums, keepsRange)) break;
    // Keep the primary sums in step with the swap just made.
    for (let a = 0; a < groups.length; a++) {
      if (groups[a]!.some((x, k) => x !== before[a]![k])) {
        sums[a] = groups[a]!.reduce((s, i) => s + values[i]!, 0);
      }
    }
  }
  return groups;
}

/** Steps 1 to 3: S groups of P indices into `values` (values.length must be S·P). */
export function partitionBalanced(
  values: readonly number[],
  groups: number,
  options: PartitionOptions = {},
): number[][] {
  if (groups < 1 || values.length % groups !== 0)
    throw new RangeError(`${values.length} numbers do not split into ${groups} equal groups`);
  return improveBySwaps(balancedDifferencing(values, groups), values, options);
}

/** Largest minus smallest group sum. */
export function groupSpread(groups: readonly number[][], values: readonly number[]): number {
  return spreadOf(sumsOf(groups, values));
}

/**
 * A lower bound of the spread any balanced partition can reach, the largest of three: the group
 * holding the largest number holds at least it and the P − 1 smallest others, and some group is
 * at or below the mean; the group holding the smallest number holds at most it and the P − 1
 * largest others, and some group is at or above the mean; and the quantum bound below.
 */
export function spreadLowerBound(values: readonly number[], groups: number): number {
  const n = values.length;
  const per = n / groups;
  if (!Number.isInteger(per) || per < 1 || groups < 2) return 0;
  const sorted = [...values].sort((a, b) => a - b);
  const total = sorted.reduce((s, x) => s + x, 0);
  const mean = total / groups;
  let smallest = 0;
  for (let i = 0; i < per - 1; i++) smallest += sorted[i]!;
  let largest = 0;
  for (let i = 0; i < per - 1; i++) largest += sorted[n - 1 - i]!;
  const withMax = sorted[n - 1]! + smallest;
  const withMin = sorted[0]! + largest;
  return Math.max(0, withMax - mean, mean - withMin, quantumBound(sorted, groups));
}

/** Whole numbers of this unit are looked for: 1 µAh when the values are in Ah. */
const QUANTUM_SCALE = 1e6;

function gcd(a: number, b: number): number {
  while (b !== 0) [a, b] = [b, a % b];
  return a;
}

/**
 * When every number is a whole multiple of a quantum q (capacities rounded to 1 mAh, say), every
 * group sum is too; if the total does not split into S equal multiples of q, the sums cannot all
 * be equal and differ by at least q.
 */
function quantumBound(values: readonly number[], groups: number): number {
  let g = 0;
  let total = 0;
  for (const v of values) {
    const k = Math.round(v * QUANTUM_SCALE);
    if (Math.abs(k - v * QUANTUM_SCALE) > 1e-6 * Math.max(1, Math.abs(k))) return 0;
    g = gcd(g, Math.abs(k));
    total += k;
  }
  if (g === 0 || !Number.isSafeInteger(total)) return 0;
  return (total / g) % groups === 0 ? 0 : g / QUANTUM_SCALE;
}
