/**
 * A pack plan: S series groups of P parallel cells chosen from the eligible cells. Pure.
 *
 * A series string gives the capacity of its weakest parallel group, so the plan takes the S·P
 * cells of highest capacity (the largest total there is) and splits them into groups whose sums
 * are as equal as possible (src/pack/partition.ts), evening the groups' parallel resistance
 * second without widening the capacity spread.
 */
import { groupSpread, partitionBalanced, spreadLowerBound } from './partition.js';

export interface PackCell {
  cell_id: string;
  capacity_Ah: number;
  /** DC internal resistance; null when no run measured it. */
  resistance_ohm: number | null;
}

export interface PackGroup {
  /** 1 for the group at the pack's negative end. */
  index: number;
  cells: PackCell[];
  capacity_Ah: number;
  /** The parallel group's resistance, 1 / Σ(1/R); null when a cell has no figure. */
  resistance_ohm: number | null;
}

export interface PackPlan {
  series: number;
  parallel: number;
  groups: PackGroup[];
  /** The weakest group's capacity: what the pack gives. */
  pack_capacity_Ah: number;
  mean_group_Ah: number;
  /** Largest minus smallest group capacity, and the least any grouping of these cells can reach. */
  spread_Ah: number;
  lower_bound_Ah: number;
  /** Largest minus smallest group resistance; null when a figure is missing. */
  resistance_spread_ohm: number | null;
  /** Sum of the groups' resistances (cells only, no interconnects). */
  pack_resistance_ohm: number | null;
  eligible: number;
  left_out: PackCell[];
}

function groupResistance(cells: readonly PackCell[]): number | null {
  let g = 0;
  for (const c of cells) {
    if (c.resistance_ohm === null || !(c.resistance_ohm > 0)) return null;
    g += 1 / c.resistance_ohm;
  }
  return 1 / g;
}

function spread(xs: readonly number[]): number {
  return Math.max(...xs) - Math.min(...xs);
}

/** The plan, or the number of cells missing when there are too few eligible. */
export function planPack(
  eligible: readonly PackCell[],
  series: number,
  parallel: number,
): PackPlan | { missing: number } {
  const need = series * parallel;
  if (eligible.length < need) return { missing: need - eligible.length };
  const ranked = [...eligible].sort(
    (a, b) =>
      b.capacity_Ah - a.capacity_Ah ||
      (a.resistance_ohm ?? Infinity) - (b.resistance_ohm ?? Infinity) ||
      a.cell_id.localeCompare(b.cell_id),
  );
  const chosen = ranked.slice(0, need);
  const caps = chosen.map((c) => c.capacity_Ah);
  const known = chosen.filter((c) => c.resistance_ohm !== null && c.resistance_ohm > 0);
  // A cell without a resistance figure counts as the median conductance: neither pulls its group.
  const conductances = known.map((c) => 1 / c.resistance_ohm!).sort((a, b) => a - b);
  const median = conductances[Math.floor(conductances.length / 2)] ?? 1;
  const secondary = chosen.map((c) =>
    c.resistance_ohm !== null && c.resistance_ohm > 0 ? 1 / c.resistance_ohm : median,
  );
  const indexGroups =
    series === 1
      ? [chosen.map((_, i) => i)]
      : partitionBalanced(caps, series, known.length > 0 ? { secondary } : {});
  const groups = indexGroups
    .map((ix) => ix.map((i) => chosen[i]!).sort((a, b) => b.capacity_Ah - a.capacity_Ah))
    .map((cells) => ({
      cells,
      capacity_Ah: cells.reduce((s, c) => s + c.capacity_Ah, 0),
      resistance_ohm: groupResistance(cells),
    }))
    .sort((a, b) => b.capacity_Ah - a.capacity_Ah)
    .map((g, i) => ({ index: i + 1, ...g }));
  const capacities = groups.map((g) => g.capacity_Ah);
  const resistances = groups.map((g) => g.resistance_ohm);
  const allR = resistances.every((r): r is number => r !== null);
  return {
    series,
    parallel,
    groups,
    pack_capacity_Ah: Math.min(...capacities),
    mean_group_Ah: capacities.reduce((s, x) => s + x, 0) / series,
    spread_Ah: series === 1 ? 0 : groupSpread(indexGroups, caps),
    lower_bound_Ah: series === 1 ? 0 : spreadLowerBound(caps, series),
    resistance_spread_ohm: allR ? spread(resistances) : null,
    pack_resistance_ohm: allR ? resistances.reduce((s, r) => s + r, 0) : null,
    eligible: eligible.length,
    left_out: ranked.slice(need),
  };
}
