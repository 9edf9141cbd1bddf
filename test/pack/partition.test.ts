import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  balancedDifferencing,
  groupSpread,
  partitionBalanced,
  spreadLowerBound,
} from '../../src/pack/partition.js';
import { mulberry32 } from '../../src/sim/prng.js';
import { exhaustiveBestSpread } from './exhaustive.js';

/** Capacities in mAh as a rig reports them: whole numbers around a rating. */
function capacities(n: number, seed: number, mean = 2500, sd = 150): number[] {
  const rnd = mulberry32(seed);
  return Array.from({ length: n }, () => {
    const u = Math.max(1e-12, rnd());
    const z = Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * rnd());
    return Math.round(mean + sd * z);
  });
}

describe('balanced partitioning', () => {
  it('gives S groups of exactly P, each number once', () => {
    const v = capacities(60, 1);
    const groups = partitionBalanced(v, 6);
    expect(groups).toHaveLength(6);
    for (const g of groups) expect(g).toHaveLength(10);
    expect(groups.flat().sort((a, b) => a - b)).toEqual(v.map((_, i) => i));
  });

  it('differencing alone keeps one number per block in each group (Michiels et al. 2003)', () => {
    const v = [9, 8, 7, 6, 5, 4];
    const groups = balancedDifferencing(v, 2);
    // Blocks of the sorted values: {9,8}, {7,6}, {5,4}; every group takes one of each.
    for (const g of groups) {
      const got = g.map((i) => v[i]!).sort((a, b) => b - a);
      expect(got[0]! >= 8 && got[1]! <= 7 && got[1]! >= 6 && got[2]! <= 5).toBe(true);
    }
    expect(groupSpread(groups, v)).toBe(1); // 9+6+5 = 20 against 8+7+4 = 19: the best there is
  });

  it('matches exhaustive search on small cases, and the lower bound never passes the optimum', () => {
    let optimal = 0;
    let cases = 0;
    for (const [S, P] of [
      [2, 3],
      [2, 4],
      [3, 2],
      [3, 3],
      [4, 2],
      [3, 4],
      [2, 6],
    ] as const) {
      for (let seed = 1; seed <= 25; seed++) {
        const v = capacities(S * P, seed * 31 + S * 7 + P);
        const best = exhaustiveBestSpread(v, S);
        const got = groupSpread(partitionBalanced(v, S), v);
        const bound = spreadLowerBound(v, S);
        expect(bound).toBeLessThanOrEqual(best + 1e-9);
        expect(got).toBeGreaterThanOrEqual(best - 1e-9);
        cases++;
        if (got <= best + 1e-9) optimal++;
      }
    }
    // Differencing plus swaps is a heuristic: it finds the optimum in most small cases.
    expect(optimal / cases).toBeGreaterThan(0.8);
  });

  it('the lower bound is met where it is reachable: one huge number forces the spread', () => {
    // 100 with the two smallest (1, 2) is 103; the mean of 2 groups of 3 is (100+1+2+3+4+5)/2.
    const v = [100, 1, 2, 3, 4, 5];
    const bound = spreadLowerBound(v, 2);
    expect(bound).toBeCloseTo(103 - 57.5, 12);
    expect(exhaustiveBestSpread(v, 2)).toBe(103 - 12);
    expect(groupSpread(partitionBalanced(v, 2), v)).toBe(91);
  });

  it('on 14 × 100 from real-looking capacities, ends within 0.1 % of the mean above the bound', () => {
    const v = capacities(1400, 77);
    const groups = partitionBalanced(v, 14);
    const mean = v.reduce((s, x) => s + x, 0) / 14;
    const spread = groupSpread(groups, v);
    expect(spread - spreadLowerBound(v, 14)).toBeLessThanOrEqual(0.001 * mean);
  });

  it('swaps never widen the spread left by differencing (property)', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 2, max: 6 }),
        fc.integer({ min: 1, max: 8 }),
        fc.integer({ min: 1, max: 1e6 }),
        (S, P, seed) => {
          const v = capacities(S * P, seed);
          const first = groupSpread(balancedDifferencing(v, S), v);
          expect(groupSpread(partitionBalanced(v, S), v)).toBeLessThanOrEqual(first + 1e-9);
        },
      ),
      { numRuns: 200 },
    );
  });

  it('the secondary pass evens conductance without widening the capacity spread', () => {
    const v = capacities(200, 5);
    const rnd = mulberry32(9);
    const g = v.map(() => 1 / (0.02 + 0.04 * rnd()));
    const plain = partitionBalanced(v, 10);
    const both = partitionBalanced(v, 10, { secondary: g });
    expect(groupSpread(both, v)).toBeLessThanOrEqual(groupSpread(plain, v) + 1e-9);
    expect(groupSpread(both, g)).toBeLessThan(groupSpread(plain, g));
  });
});

describe('the lower bound of the spread', () => {
  it('counts the quantum: whole mAh whose total does not split evenly cannot give equal groups', () => {
    // 1 + 2 + 3 + 5 = 11 mAh into 2 groups of 2: 11 is odd, so the best is 5 against 6 (spread 1).
    const v = [0.001, 0.002, 0.003, 0.005];
    expect(spreadLowerBound(v, 2)).toBeCloseTo(0.001, 12);
    expect(exhaustiveBestSpread(v, 2)).toBeCloseTo(0.001, 12);
    // An even total allows a perfect split: 1 + 4 = 2 + 3.
    expect(spreadLowerBound([0.001, 0.002, 0.003, 0.004], 2)).toBe(0);
  });
});
