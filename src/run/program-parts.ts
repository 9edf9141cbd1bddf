/**
 * The pieces a channel's run needs for a program: its session, the setpoint counts for a
 * current (the profile and the calibration, inverted), the charger's amps per count, and the
 * precheck of the resting voltage before a program starts.
 */
import type { Corrector } from '../calibration/calibration.js';
import { applyCalibration } from '../calibration/calibration.js';
import type { AnalogChain } from '../chain/analog-chain.js';
import type { ChemistryProfile } from '../chemistry/chemistry-types.js';
import { ProgramSession } from '../program/program-session.js';
import { plausibilityFor } from '../session/plausibility.js';
import type { RunConfig } from './run-config.js';

/**
 * The setpoint in counts whose corrected current is nearest `amps`: the chain and the
 * calibration are monotonic in the count, so a bisection over the ADC's codes inverts them
 * whatever the calibration's form (docs/protocol.md: setpoints are in the units of `i_raw`).
 */
export function countsForAmps(
  chain: Pick<AnalogChain, 'amps'>,
  corrector: Pick<Corrector, 'current'>,
  maxCount: number,
  amps: number,
): number {
  const at = (raw: number): number => corrector.current(chain.amps(raw));
  let lo = 0;
  let hi = maxCount;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (at(mid) < amps) lo = mid + 1;
    else hi = mid;
  }
  return lo > 0 && Math.abs(at(lo - 1) - amps) <= Math.abs(at(lo) - amps) ? lo - 1 : lo;
}

/** Amps per count of a 1.1 rig's charger monitor, or null for a rig without one. */
export function chargerAmpsPerCount(cfg: Pick<RunConfig, 'profile' | 'chain'>): number | null {
  const c = cfg.profile.charger;
  return c ? cfg.chain.adcVoltsPerCount * c.monitor_A_per_V : null;
}

/**
 * Why a resting string must not start a program, or null: above the chemistry's highest
 * resting voltage it is not the cell count or chemistry given; below its floor it was
 * over-discharged, and charging it is for a charger with a pre-charge phase and a person watching.
 */
export function programRestCheck(chemistry: ChemistryProfile, cells: number) {
  return (restV: number): string | null => {
    const high = chemistry.max_rest_V_per_cell.value * cells;
    const floor = chemistry.floor_V_per_cell.value * cells;
    if (restV > high)
      return `the string rests at ${restV.toFixed(3)} V, above ${high.toFixed(3)} V for ${cells} × ${chemistry.id}: check --cells and --chemistry`;
    if (restV < floor)
      return `the string rests at ${restV.toFixed(3)} V, below its floor of ${floor.toFixed(3)} V: an over-discharged cell is not charged by a program; check it, and recover it only with a charger's pre-charge under watch`;
    return null;
  };
}

export function newProgramSession(
  cfg: RunConfig,
  x: { channel: number; linkTimeoutS: number; originMs: number },
): ProgramSession {
  const { chemistry, cells, chain, profile } = cfg;
  const plan = cfg.program!.plan;
  const corrector = applyCalibration(cfg.calibration);
  const plausibility = plausibilityFor({
    maxRestVPerCell: chemistry.max_rest_V_per_cell.value,
    cells,
    ampsPerCount: chain.ampsPerCount,
  });
  const maxCount = 2 ** profile.adc.bits - 1;
  return new ProgramSession({
    channel: x.channel,
    cutoffV: cfg.cutoff.total,
    floorV: cfg.floorV,
    maxTemperatureC: cfg.maxTemperatureC,
    maxCurrentA: cfg.maxCurrentA,
    linkTimeoutMs: x.linkTimeoutS * 1000,
    plausibility,
    checkRest: programRestCheck(chemistry, cells),
    plan,
    originMs: x.originMs,
    countsForAmps: (amps) => countsForAmps(chain, corrector, maxCount, amps),
    accounting: {
      maxVolts: plausibility.maxVolts,
      ampsPerCount: chain.ampsPerCount,
      chargerAmpsPerCount: chargerAmpsPerCount(cfg),
      voltsPerCount: chain.voltsPerCount,
      calibration: cfg.calibration,
    },
  });
}
