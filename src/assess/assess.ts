/**
 * `assess`: what a rig profile's analog chain can resolve, the errors it would show before
 * calibration, the smallest current worth measuring, and the expected uncertainty of a stated
 * capacity test. Pure: a profile (and optionally a calibration) in, a report out.
 */
import type { Calibration } from '../calibration/calibration.js';
import { AnalogChain } from '../chain/analog-chain.js';
import type { RigProfile } from '../chain/rig-profile-types.js';
import type { ChemistryProfile } from '../chemistry/chemistry-types.js';
import { batteryRangeWarning } from '../chemistry/full-scale.js';
import { capacityBudget, type CapacityBudget } from './capacity-budget.js';
import {
  chainResolution,
  DEFAULT_ASSESS_TEMPERATURES,
  type ChainResolution,
} from './chain-resolution.js';
import { checkResolutionClaim } from './claims.js';
import { currentFloor, type CurrentFloor } from './current-floor.js';
import { frontEndErrors, type FrontEndErrors } from './front-end-errors.js';

export interface AssessRequest {
  rigFile: string;
  profile: RigProfile;
  temperatures?: readonly number[];
  test?: { currentA: number; hours: number };
  calibration?: Calibration | null;
  referenceAccuracy?: string;
  claimResolutionA?: number;
  /** Tolerance of the rig's own oscillator, fraction (0.03 = ±3 %). */
  rigClockTolerance?: number;
  /** The battery to be tested: warned about when a full one is beyond the voltage range. */
  battery?: { chemistry: ChemistryProfile; cells: number };
}

export interface AssessReport {
  rig: { file: string; name: string | null };
  chain: ChainResolution;
  front_end: FrontEndErrors;
  smallest_current: CurrentFloor;
  test?: CapacityBudget;
  warnings: string[];
}

export function assess(req: AssessRequest): AssessReport {
  const chain = new AnalogChain(req.profile);
  const resolution = chainResolution(chain, req.temperatures ?? DEFAULT_ASSESS_TEMPERATURES);
  const errors = frontEndErrors(req.profile, chain);
  const floor = currentFloor(chain.ampsPerCount, errors);
  const warnings: string[] = [];
  const report: AssessReport = {
    rig: { file: req.rigFile, name: req.profile.name ?? null },
    chain: resolution,
    front_end: errors,
    smallest_current: floor,
    warnings,
  };
  if (req.battery) {
    const w = batteryRangeWarning(
      req.battery.chemistry,
      req.battery.cells,
      resolution.full_scale_V,
      chain.adcVoltsPerCount * 2 ** chain.bits,
      req.profile.voltage.divider_bottom_ohm,
    );
    if (w) warnings.push(w);
  }
  if (req.claimResolutionA !== undefined) {
    const w = checkResolutionClaim(req.claimResolutionA, resolution, req.profile);
    if (w) warnings.push(w);
  }
  if (req.test) {
    const { currentA, hours } = req.test;
    report.test = capacityBudget({
      currentA,
      hours,
      ampsPerCount: chain.ampsPerCount,
      calibration: req.calibration ?? null,
      frontEnd: errors,
      ...(req.referenceAccuracy !== undefined ? { referenceAccuracy: req.referenceAccuracy } : {}),
      ...(req.rigClockTolerance !== undefined ? { rigClockTolerance: req.rigClockTolerance } : {}),
    });
    if (currentA > 0.98 * resolution.full_scale_A) {
      warnings.push(
        `the test current ${currentA} A is at or beyond the current channel's full scale of ${resolution.full_scale_A.toFixed(3)} A: readings pin at the top count. ` +
          (currentA / 1000 < 0.98 * resolution.full_scale_A
            ? `Did you mean ${currentA / 1000} A (${currentA} looks like mA)? Otherwise use less amplifier gain or a smaller shunt.`
            : 'Use less amplifier gain or a smaller shunt.'),
      );
    }
    const calibrated = report.test.mode !== 'uncalibrated';
    const lowest = calibrated ? floor.calibrated_A : floor.uncalibrated_A;
    if (currentA < lowest) {
      warnings.push(
        `the test current ${currentA} A is below the smallest current worth measuring on this chain ` +
          `(${lowest.toPrecision(3)} A${calibrated ? '' : ' uncalibrated'}): ` +
          (calibrated
            ? 'one count is more than 1 % of it; raise the amplifier gain or the shunt.'
            : 'calibrate the current channel, or raise the amplifier gain.'),
      );
    }
  }
  return report;
}
