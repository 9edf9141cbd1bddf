/**
 * A channel read at the top of its range says only that the true value is somewhere above it:
 * a 12 V block on a 6.6 V range reads 6.6 V, which the resting-voltage check would take for a
 * flat or wrong battery, and a discharge would never see the cutoff. Such a reading is its own
 * refusal, naming the range and the divider, before the chemistry is judged at all.
 */
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import { meaningful } from '../core/meaningful.js';
import type { ChemistryProfile } from './chemistry-types.js';
import { checkRestingVoltage, type RestCheck } from './limits.js';

/**
 * A reading at or above this share of the channel's full scale is taken as pinned: a few counts
 * below the top the ADC is already clipping, and a calibration shifts the top by a few percent.
 */
export const NEAR_FULL_SCALE = 0.98;

/** The error for a reading at or near full scale, or null when the reading is inside the range. */
export function fullScaleError(
  quantity: 'voltage' | 'current',
  reading: number,
  fullScale: number,
  where: string,
): CellvigilError | null {
  if (!(reading >= NEAR_FULL_SCALE * fullScale)) return null;
  const unit = quantity === 'voltage' ? 'V' : 'A';
  const fix =
    quantity === 'voltage'
      ? 'A larger voltage range needs a larger divider: raise voltage.divider_top_ohm in the rig profile (and the resistor on the board), check the new range with `cellvigil assess <rig> --chemistry <id> --cells <n>`, or test fewer cells in series. Nothing was switched on.'
      : 'A larger current range needs less amplifier gain or a smaller shunt (current.amplifier_gain / current.shunt_ohm in the rig profile, and on the board), or a larger load resistor for less current; check it with `cellvigil assess`.';
  return makeError(
    ErrorCodes.BEYOND_RANGE,
    `the ${quantity} channel reads ${meaningful(reading, 3)} ${unit}, at its full scale of ${meaningful(fullScale, 3)} ${unit}: the true ${quantity} is beyond what this rig can measure, so it is unknown`,
    where,
    fix,
  );
}

/**
 * The start check: first that the resting voltage is inside the voltage channel's range, then
 * checkRestingVoltage. `fullScaleV` must be in the same terms as `restV` (calibrated when the
 * reading is).
 */
export function checkStartVoltage(
  profile: ChemistryProfile,
  cells: number,
  restV: number,
  cutoffPerCell: number,
  alternatives: readonly ChemistryProfile[],
  fullScaleV: number,
): RestCheck {
  const pinned = fullScaleError(
    'voltage',
    restV,
    fullScaleV,
    `resting voltage, ${cells} × ${profile.id}`,
  );
  if (pinned) return { ok: false, reason: 'beyond_range', error: pinned, fits: [] };
  return checkRestingVoltage(profile, cells, restV, cutoffPerCell, alternatives);
}

/**
 * For `assess`: a warning when a full battery of `cells` × `profile` rests above the voltage
 * channel's full scale, with the divider that would take it; null when it fits.
 */
export function batteryRangeWarning(
  profile: ChemistryProfile,
  cells: number,
  fullScaleV: number,
  adcFullScaleV: number,
  bottomOhm: number,
): string | null {
  const top = profile.max_rest_V_per_cell.value * cells;
  if (top < NEAR_FULL_SCALE * fullScaleV) return null;
  // A divider that puts the full battery at 80 % of the ADC's range leaves room for a charger's overshoot.
  const ratio = top / (0.8 * adcFullScaleV);
  const neededTop = bottomOhm * (ratio - 1);
  return (
    `${cells} × ${profile.id} rests at up to ${meaningful(top, 3)} V, beyond the voltage channel's full scale of ${meaningful(fullScaleV, 3)} V: ` +
    `readings pin at the top count and \`run\` refuses to start. A divider_top_ohm of about ${meaningful(neededTop, 2)} Ω ` +
    `(with divider_bottom_ohm ${meaningful(bottomOhm, 3)} Ω) gives a range of ${meaningful(top / 0.8, 3)} V.`
  );
}
