/**
 * The result keys of a program run, from its segments' figures: each full discharge is a cycle
 * with its capacity, the cycle-to-cycle trend, and the top-level figures those of the latest
 * full cycle (zero when none reached its cutoff). The live run and the recompute both build the
 * result here.
 */
import type { CycleFigures, RunResult, SegmentFigures } from '../record/result.js';
import { capacityTrend } from './cycle-trend.js';

const r = (x: number, digits: number): number => Number(x.toFixed(digits));

function cyclesOf(segments: readonly SegmentFigures[]): {
  cycles: CycleFigures[];
  trend: NonNullable<RunResult['cycle_trend']>;
} {
  const trend = capacityTrend(
    segments.map((s) => ({
      segment: {
        index: s.index,
        kind: s.kind,
        purpose: s.purpose,
        cycle: s.cycle,
        end_reason: s.end_reason as never,
      },
      capacityAh: s.charge_Ah,
      expandedAh: s.uncertainty.charge_Ah.expanded,
    })),
  );
  const cycles = trend.points.map((p): CycleFigures => {
    const s = segments.find((x) => x.index === p.segmentIndex)!;
    return {
      cycle: p.cycle,
      segment: s.index,
      capacity_Ah: s.charge_Ah,
      energy_Wh: s.energy_Wh,
      mean_current_A: s.mean_current_A,
      uncertainty: { capacity_Ah: s.uncertainty.charge_Ah, energy_Wh: s.uncertainty.energy_Wh },
      of_first: r(p.ofFirst, 6),
    };
  });
  const n = (x: number | null): number | null => (x === null ? null : r(x, 6));
  return {
    cycles,
    trend: {
      slope_Ah_per_cycle: n(trend.slopeAhPerCycle),
      slope_share_per_cycle: n(trend.slopeShare),
      change_Ah: n(trend.changeAh),
      change_beyond_uncertainty: trend.changeBeyondUncertainty,
    },
  };
}

/** `base` (built as for any run) with the program's keys and the latest full cycle's figures. */
export function withProgram<T extends RunResult>(
  base: T,
  name: string,
  segments: readonly SegmentFigures[],
): T {
  const { cycles, trend } = cyclesOf(segments);
  const last = cycles.at(-1);
  const seg = last ? segments.find((s) => s.index === last.segment)! : null;
  const meanV = seg && seg.charge_Ah > 0 ? r(seg.energy_Wh / seg.charge_Ah, 5) : null;
  return {
    ...base,
    capacity_Ah: seg?.charge_Ah ?? 0,
    energy_Wh: seg?.energy_Wh ?? 0,
    duration_s: seg?.duration_s ?? 0,
    mean_voltage_V: meanV,
    end_voltage_V: seg?.end_voltage_V ?? null,
    // The cycle's own switch-on step: the live session's precheck voltage and the recompute's
    // first step of the run are other moments of a program run.
    open_circuit_V: seg?.open_circuit_V ?? null,
    dc_resistance_ohm: seg?.dc_resistance_ohm ?? null,
    cutoff_V: seg !== null ? Number(seg.setpoint['cutoff_V'] ?? base.cutoff_V) : base.cutoff_V,
    uncertainty: seg
      ? { capacity_Ah: seg.uncertainty.charge_Ah, energy_Wh: seg.uncertainty.energy_Wh }
      : base.uncertainty,
    program: name,
    segments: [...segments],
    cycles,
    cycle_trend: trend,
  };
}
