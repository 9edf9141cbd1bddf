/**
 * The smallest current worth measuring. A reading is worth taking when one ADC count is no
 * more than 1 % of it (the rounding of a single reading stays within 1 %). Before calibration
 * the amplifier's offset must also be no more than 1 % of the reading. And a single-supply
 * stage cannot go below ground: with a negative offset, currents below its size read zero
 * whatever the calibration, so they are never measurable.
 */
import type { FrontEndErrors } from './front-end-errors.js';

/** A count, or the offset, may be at most this share of the reading. */
export const FLOOR_SHARE = 0.01;

export interface CurrentFloor {
  /** One count is 1 % of the reading: 100 counts. */
  resolution_floor_A: number;
  /** The uncalibrated offset is 1 % of the reading (when the profile gives the offset). */
  uncalibrated_floor_A?: number;
  /** Below this a negative offset hides the current entirely (when the offset is known). */
  dead_zone_A?: number;
  /** The smallest current worth measuring after calibration. */
  calibrated_A: number;
  /** The smallest current worth measuring without calibration. */
  uncalibrated_A: number;
}

export function currentFloor(ampsPerCount: number, errors: FrontEndErrors): CurrentFloor {
  const resolution = ampsPerCount / FLOOR_SHARE;
  const out: CurrentFloor = {
    resolution_floor_A: resolution,
    calibrated_A: resolution,
    uncalibrated_A: resolution,
  };
  if (errors.offset_A !== undefined) {
    const offset = Math.abs(errors.offset_A);
    out.uncalibrated_floor_A = offset / FLOOR_SHARE;
    out.dead_zone_A = offset;
    out.calibrated_A = Math.max(resolution, offset);
    out.uncalibrated_A = Math.max(resolution, out.uncalibrated_floor_A);
  }
  return out;
}
