import type { Calibration } from '../calibration/calibration.js';
import type { EndReason, SessionEnd } from '../session/session-types.js';
import { runUncertainty, type FigureUncertainty } from '../results/uncertainty.js';

/** result.json (docs/run-folder.md lists every key). */
export interface RunResult {
  capacity_Ah: number;
  energy_Wh: number;
  duration_s: number;
  end_reason: EndReason | 'refused';
  mean_voltage_V: number | null;
  end_voltage_V: number | null;
  cutoff_V: number;
  frames_accepted: number;
  frames_rejected: number;
  frames_lost: number;
  /** Frames whose readings could not be true: not integrated (docs/safety.md). */
  frames_implausible: number;
  rig_clock_error_ppm: number | null;
  calibration_id: string;
  uncertainty: { capacity_Ah: FigureUncertainty; energy_Wh: FigureUncertainty };
  end_detail: string;
  load_off_confirmed: boolean;
  chemistry: string;
  cells: number;
  open_circuit_V: number | null;
  dc_resistance_ohm: number | null;
  gaps: number;
  bridged_Ah: number;
  rig_clock_warning: boolean;
  started_wall: string;
  ended_wall: string;
  /** The discharge schedule, or null for a continuous discharge. */
  schedule: string | null;
  /** Load-on hours to the end point: a scheduled test's service output (null unless it reached the cutoff). */
  service_output_h: number | null;
  /** What is written on the cell, as the user gave it; null when none was given. */
  cell_id: string | null;
}

/** A rig clock off by more than this is worth a warning (its own timing would mislead). */
export const CLOCK_WARN_PPM = 10_000;

export interface ResultInput {
  cellId?: string | null;
  end: SessionEnd;
  detail: string;
  loadOffConfirmed: boolean;
  chargeAh: number;
  energyWh: number;
  onMs: number;
  bridgedAh: number;
  nominalAh: number;
  loadedSamples: number;
  lastLoadedV: number | null;
  cutoffV: number;
  counters: { accepted: number; rejected: number; lost: number };
  /** Frames the session left out as implausible. @default 0 */
  implausibleFrames?: number;
  rigClockErrorPpm: number | null;
  calibration: Calibration | null;
  calibrationId: string;
  ampsPerCount: number;
  voltsPerCount: number;
  chemistry: string;
  cells: number;
  openCircuitV: number | null;
  dcResistanceOhm: number | null;
  gaps: number;
  startedWallMs: number;
  endedWallMs: number;
  /** The schedule's description; absent or null for a continuous discharge. */
  schedule?: string | null;
}

const r = (x: number, digits: number): number => Number(x.toFixed(digits));
const rn = (x: number | null, digits: number): number | null =>
  x === null || !Number.isFinite(x) ? null : r(x, digits);

export function buildResult(x: ResultInput): RunResult {
  const meanV = x.chargeAh > 0 ? x.energyWh / x.chargeAh : null;
  const uncertainty = runUncertainty({
    chargeAh: x.chargeAh,
    energyWh: x.energyWh,
    nominalAh: x.nominalAh,
    onS: x.onMs / 1000,
    samples: x.loadedSamples,
    ampsPerCount: x.ampsPerCount,
    voltsPerCount: x.voltsPerCount,
    meanVoltageV: meanV ?? 0,
    bridgedAh: x.bridgedAh,
    calibration: x.calibration,
  });
  return {
    capacity_Ah: r(x.chargeAh, 6),
    energy_Wh: r(x.energyWh, 6),
    duration_s: r(x.onMs / 1000, 3),
    end_reason: x.end,
    mean_voltage_V: rn(meanV, 5),
    end_voltage_V: rn(x.lastLoadedV, 5),
    cutoff_V: x.cutoffV,
    frames_accepted: x.counters.accepted,
    frames_rejected: x.counters.rejected,
    frames_lost: x.counters.lost,
    frames_implausible: x.implausibleFrames ?? 0,
    rig_clock_error_ppm: rn(x.rigClockErrorPpm, 0),
    calibration_id: x.calibrationId,
    uncertainty,
    end_detail: x.detail,
    load_off_confirmed: x.loadOffConfirmed,
    chemistry: x.chemistry,
    cells: x.cells,
    open_circuit_V: rn(x.openCircuitV, 5),
    dc_resistance_ohm: rn(x.dcResistanceOhm, 5),
    gaps: x.gaps,
    bridged_Ah: r(x.bridgedAh, 6),
    rig_clock_warning: x.rigClockErrorPpm !== null && Math.abs(x.rigClockErrorPpm) > CLOCK_WARN_PPM,
    started_wall: new Date(x.startedWallMs).toISOString(),
    ended_wall: new Date(x.endedWallMs).toISOString(),
    schedule: x.schedule ?? null,
    cell_id: x.cellId ?? null,
    service_output_h:
      x.schedule !== null && x.schedule !== undefined && x.end === 'cutoff'
        ? r(x.onMs / 3_600_000, 6)
        : null,
  };
}

/** Exit codes (README): 0 normal end, 2 nothing switched on (configuration, precheck), 3 safety limit. */
export function exitCodeFor(end: SessionEnd, detail: string): number {
  switch (end) {
    case 'cutoff':
    case 'stopped':
      return 0;
    case 'over_temperature':
    case 'link_lost':
    case 'fault':
    case 'implausible_reading':
    case 'open_load':
      return 3;
    case 'refused':
      // A rig that never spoke is a failure of the set-up, not of the configuration.
      return detail.startsWith('rig_silent') ? 1 : 2;
  }
}
