/**
 * The safety rules for switching a load on during a calibration, the same limits a run
 * enforces: the resting-voltage check before the load goes on, and, on every frame while it is
 * on, the chemistry's voltage floor, its highest temperature, the rig's current limit and the
 * rig's own fault flag. No option relaxes them.
 */
import type { AnalogChain } from '../chain/analog-chain.js';
import type { RigProfile } from '../chain/rig-profile-types.js';
import type { ChemistryProfile } from '../chemistry/chemistry-types.js';
import { checkRestingVoltage, fmtV, resolveCutoff } from '../chemistry/limits.js';
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import { FLAG_RIG_FAULT } from '../protocol/messages.js';

export interface LoadGuard {
  chemistry: ChemistryProfile;
  cells: number;
  /** All chemistry profiles, for the "fits" hint of a refusal. */
  alternatives: readonly ChemistryProfile[];
  cutoffPerCell: number;
  /** The chemistry's safety floor for the string, V. */
  floorV: number;
  maxTemperatureC: number;
  maxCurrentA: number;
}

/**
 * A reading pinned near the top count hides how much current really flows, so the limit is
 * never above 98 % of the chain's full scale (as for a run).
 */
export function makeLoadGuard(
  chemistry: ChemistryProfile,
  cells: number,
  alternatives: readonly ChemistryProfile[],
  profile: RigProfile,
  chain: AnalogChain,
): LoadGuard {
  const cutoff = resolveCutoff(chemistry, cells);
  const fullScaleA = 0.98 * chain.fullScale().amps;
  const rigLimit = profile.limits?.max_current_A;
  return {
    chemistry,
    cells,
    alternatives,
    cutoffPerCell: cutoff.perCell,
    floorV: chemistry.floor_V_per_cell.value * cells,
    maxTemperatureC: chemistry.max_temperature_C.value,
    maxCurrentA: rigLimit !== undefined ? Math.min(rigLimit, fullScaleA) : fullScaleA,
  };
}

/** Before switching on: the resting voltage must suit the chemistry and lie above its cutoff. */
export function checkBeforeLoad(g: LoadGuard, restV: number): CellvigilError | null {
  const r = checkRestingVoltage(g.chemistry, g.cells, restV, g.cutoffPerCell, g.alternatives);
  return r.ok ? null : r.error;
}

export interface LoadReading {
  volts: number;
  amps: number;
  celsius: number;
  thermistorOk: boolean;
  flags: number;
}

/** While the load is on: the first limit a frame breaks, or null. */
export function checkUnderLoad(g: LoadGuard, r: LoadReading, where: string): CellvigilError | null {
  const trip = (what: string, fix: string): CellvigilError =>
    makeError(
      ErrorCodes.CALIBRATION_CAPTURE,
      `${what}; the load was switched off and nothing was written`,
      where,
      fix,
    );
  if ((r.flags & FLAG_RIG_FAULT) !== 0) {
    return trip(
      'the rig reports a fault (it cut the load itself)',
      'Find the cause at the rig before calibrating again.',
    );
  }
  if (r.volts < g.floorV) {
    return trip(
      `the cell fell to ${fmtV(r.volts)} V under load, below the ${g.chemistry.id} safety floor of ${fmtV(g.floorV)} V`,
      'Charge the cell before taking the loaded points, or use a lighter load.',
    );
  }
  if (!r.thermistorOk) {
    return trip(
      'the thermistor reads open or shorted, so the cell temperature cannot be watched',
      'Fix the NTC wiring before switching a load on.',
    );
  }
  if (r.celsius > g.maxTemperatureC) {
    return trip(
      `the cell reached ${r.celsius.toFixed(1)} °C, above the ${g.chemistry.id} limit of ${g.maxTemperatureC} °C`,
      "Let the cell cool and check the load's heat path before calibrating again.",
    );
  }
  if (r.amps > g.maxCurrentA) {
    return trip(
      `the current reads ${r.amps.toFixed(3)} A, above the rig's limit of ${g.maxCurrentA.toFixed(3)} A`,
      'Use a larger load resistor, or raise limits.max_current_A in the rig profile only if the rig is built for it.',
    );
  }
  return null;
}
