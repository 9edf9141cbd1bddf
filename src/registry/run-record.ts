import type { CycleFigures } from '../record/result.js';

/**
 * One run as the registry keeps it: the figures of a run folder's result.json that a cell's
 * history needs, keyed so that the same run filed twice is one row. Pure: no I/O.
 */

/** The keys of result.json (and manifest.json) the registry reads; more may be present. */
export interface ResultFigures {
  capacity_Ah: number;
  energy_Wh: number;
  duration_s: number;
  end_reason: string;
  calibration_id: string;
  started_wall?: string;
  ended_wall?: string;
  chemistry?: string;
  cells?: number;
  mean_voltage_V?: number | null;
  end_voltage_V?: number | null;
  dc_resistance_ohm?: number | null;
  /** Mean cell temperature during the discharge, when the result carries one. */
  mean_temperature_C?: number | null;
  uncertainty?: {
    capacity_Ah?: { standard: number; expanded: number; k: number };
    energy_Wh?: { standard: number; expanded: number; k: number };
  };
  cell_id?: string;
  /** A program run's full cycles (result.json `cycles`). */
  cycles?: CycleFigures[];
}

/** One full cycle of a program run: its discharge's capacity, filed linked to the run. */
export interface CycleRecord {
  /** The repeat pass (or the count of full discharges), as result.json numbers it. */
  cycle: number;
  /** Index of the discharge segment in the run. */
  segment: number;
  capacity_Ah: number;
  /** Standard uncertainty (k = 1); null when the result states none. */
  capacity_u_Ah: number | null;
  energy_Wh: number | null;
  energy_u_Wh: number | null;
  mean_current_A: number | null;
  /** This cycle's capacity over the run's first cycle's. */
  of_first: number | null;
}

export interface RunRecord {
  /** `<cell id>@<started_wall>`: the same run filed again replaces its row. */
  run_key: string;
  cell_id: string;
  /** The run folder's name (its last path component). */
  folder: string;
  started_ms: number;
  started_wall: string;
  ended_wall: string | null;
  end_reason: string;
  chemistry: string | null;
  cells: number | null;
  capacity_Ah: number;
  /** Standard uncertainty (k = 1); null when the result states none. */
  capacity_u_Ah: number | null;
  energy_Wh: number;
  energy_u_Wh: number | null;
  dc_resistance_ohm: number | null;
  mean_voltage_V: number | null;
  end_voltage_V: number | null;
  /** Charge over load-on time: the mean discharge current. */
  mean_current_A: number | null;
  temperature_C: number | null;
  duration_s: number;
  calibration_id: string;
  /**
   * A program run's full cycles, counted (null or absent for a run that was one discharge).
   * The run's own figures are then those of its latest full cycle.
   */
  full_cycles?: number | null;
  /** A program run's cycles in the order they ran; absent for a run that was one discharge. */
  cycles?: CycleRecord[];
}

/** Why a run folder gives no record. */
export type SkipReason = 'no_cell_id' | 'no_start_time';

export const CELL_ID_PATTERN = /^[A-Za-z0-9][A-Za-z0-9._:/-]{0,63}$/;

const finiteOrNull = (x: number | null | undefined): number | null =>
  typeof x === 'number' && Number.isFinite(x) ? x : null;

/**
 * The registry's record of a run, or why there is none. The cell id comes from result.json,
 * else from the manifest; the start time from result.json, else from the manifest.
 */
export function recordFromResult(
  result: ResultFigures,
  folder: string,
  manifest: { cell_id?: string; started_wall?: string } | null,
): RunRecord | SkipReason {
  const cellId = result.cell_id ?? manifest?.cell_id;
  if (cellId === undefined || !CELL_ID_PATTERN.test(cellId)) return 'no_cell_id';
  const startedWall = result.started_wall ?? manifest?.started_wall;
  const startedMs = startedWall === undefined ? NaN : Date.parse(startedWall);
  if (!Number.isFinite(startedMs)) return 'no_start_time';
  const hours = result.duration_s / 3600;
  return {
    run_key: `${cellId}@${new Date(startedMs).toISOString()}`,
    cell_id: cellId,
    folder,
    started_ms: startedMs,
    started_wall: new Date(startedMs).toISOString(),
    ended_wall: result.ended_wall ?? null,
    end_reason: result.end_reason,
    chemistry: result.chemistry ?? null,
    cells: result.cells ?? null,
    capacity_Ah: result.capacity_Ah,
    capacity_u_Ah: finiteOrNull(result.uncertainty?.capacity_Ah?.standard),
    energy_Wh: result.energy_Wh,
    energy_u_Wh: finiteOrNull(result.uncertainty?.energy_Wh?.standard),
    dc_resistance_ohm: finiteOrNull(result.dc_resistance_ohm),
    mean_voltage_V: finiteOrNull(result.mean_voltage_V),
    end_voltage_V: finiteOrNull(result.end_voltage_V),
    mean_current_A: hours > 0 ? result.capacity_Ah / hours : null,
    temperature_C: finiteOrNull(result.mean_temperature_C),
    duration_s: result.duration_s,
    calibration_id: result.calibration_id,
    ...(Array.isArray(result.cycles) ? cyclesOf(result.cycles) : {}),
  };
}

function cyclesOf(cycles: readonly CycleFigures[]): { full_cycles: number; cycles: CycleRecord[] } {
  return {
    full_cycles: cycles.length,
    cycles: cycles.map((c) => ({
      cycle: c.cycle,
      segment: c.segment,
      capacity_Ah: c.capacity_Ah,
      capacity_u_Ah: finiteOrNull(c.uncertainty?.capacity_Ah?.standard),
      energy_Wh: finiteOrNull(c.energy_Wh),
      energy_u_Wh: finiteOrNull(c.uncertainty?.energy_Wh?.standard),
      mean_current_A: finiteOrNull(c.mean_current_A),
      of_first: finiteOrNull(c.of_first),
    })),
  };
}
