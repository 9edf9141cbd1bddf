import { describe, expect, it } from 'vitest';
import { packCsv, packPage } from '../../src/pack/pack-page.js';
import { planPack, type PackCell } from '../../src/pack/pack-plan.js';
import { mulberry32 } from '../../src/sim/prng.js';

function cells(n: number, seed: number): PackCell[] {
  const rnd = mulberry32(seed);
  return Array.from({ length: n }, (_, i) => ({
    cell_id: `C${i}`,
    capacity_Ah: Math.round((2.0 + 0.5 * rnd()) * 1000) / 1000,
    resistance_ohm: 0.03 + 0.04 * rnd(),
  }));
}

describe('pack plan', () => {
  it('takes the S·P cells of highest capacity and groups them', () => {
    const pool = cells(50, 1);
    const plan = planPack(pool, 4, 10);
    if ('missing' in plan) throw new Error('too few');
    const used = plan.groups.flatMap((g) => g.cells);
    expect(used).toHaveLength(40);
    const minUsed = Math.min(...used.map((c) => c.capacity_Ah));
    expect(plan.left_out.every((c) => c.capacity_Ah <= minUsed)).toBe(true);
    expect(plan.pack_capacity_Ah).toBe(Math.min(...plan.groups.map((g) => g.capacity_Ah)));
    expect(plan.spread_Ah).toBeGreaterThanOrEqual(plan.lower_bound_Ah);
  });

  it("a parallel group's resistance is 1/Σ(1/R) (Ohm's law for resistors in parallel)", () => {
    const plan = planPack(
      [
        { cell_id: 'a', capacity_Ah: 2, resistance_ohm: 0.04 },
        { cell_id: 'b', capacity_Ah: 2, resistance_ohm: 0.04 },
      ],
      1,
      2,
    );
    if ('missing' in plan) throw new Error('too few');
    expect(plan.groups[0]!.resistance_ohm).toBeCloseTo(0.02, 12);
    expect(plan.pack_resistance_ohm).toBeCloseTo(0.02, 12);
  });

  it('says how many cells are missing', () => {
    expect(planPack(cells(10, 2), 3, 4)).toEqual({ missing: 2 });
  });

  it('exports one CSV row per cell and a page with one picture column per group', () => {
    const plan = planPack(cells(30, 3), 3, 8);
    if ('missing' in plan) throw new Error('too few');
    const csv = packCsv(plan).trim().split('\n');
    expect(csv[0]).toBe(
      'group,position,cell_id,capacity_Ah,dc_resistance_ohm,group_capacity_Ah,group_resistance_ohm',
    );
    expect(csv).toHaveLength(25);
    const html = packPage(plan, 'all graded cells', '2026-12-01T00:00:00Z');
    expect(html.match(/<g data-group="/g)).toHaveLength(3);
    expect(html).not.toMatch(/<script|https?:\/\/(?!www\.w3\.org)/);
  });
});
