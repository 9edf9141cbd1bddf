/**
 * A typed reference reading judged against what the rig's nominal chain read at the same point,
 * as soon as it is typed: a reading in the wrong unit (4097 for 4.097 V) or one wildly unlike
 * the rig's would otherwise spoil the whole fit, which is refused only at the end.
 */
import { meaningful } from '../core/meaningful.js';
import { UNITS, type Quantity } from './calibration.js';

/** The band of reference/nominal ratios a real board falls in; the fit refuses gains outside it. */
export const RATIO_BAND = { low: 0.5, high: 2 } as const;
/** Below this share of full scale a reading is judged by its difference, not by its ratio. */
const SMALL_SHARE = 0.05;
/** A thermistor offset larger than this means a misread or a sensor not at the cell, °C. */
const TEMPERATURE_SPREAD_C = 15;

function near(reading: number, nominal: number, fullScale: number): boolean {
  const small = SMALL_SHARE * fullScale;
  if (Math.abs(nominal) < small) return Math.abs(reading - nominal) <= small;
  const ratio = reading / nominal;
  return ratio >= RATIO_BAND.low && ratio <= RATIO_BAND.high;
}

/**
 * Why `reading` cannot be the meter's value for a point the rig read as `nominal`, or null when
 * it is plausible. `fullScale` is the channel's full scale in the same unit (unused for °C).
 */
export function readingSlip(
  quantity: Quantity,
  reading: number,
  nominal: number,
  fullScale: number,
): string | null {
  const unit = UNITS[quantity];
  const rig = `${meaningful(nominal, 4)} ${unit}`;
  if (quantity === 'temperature') {
    if (Math.abs(reading - nominal) <= TEMPERATURE_SPREAD_C) return null;
    const fromF = ((reading - 32) * 5) / 9;
    if (Math.abs(fromF - nominal) <= TEMPERATURE_SPREAD_C / 3) {
      return `${meaningful(reading, 4)} looks like degrees Fahrenheit (${meaningful(fromF, 3)} °C); the rig reads ${rig}. Type the reading in °C`;
    }
    return `${meaningful(reading, 4)} °C is more than ${TEMPERATURE_SPREAD_C} °C away from the rig's ${rig}: is the reference thermometer against the cell, next to the NTC?`;
  }
  if (near(reading, nominal, fullScale)) return null;
  if (near(reading / 1000, nominal, fullScale)) {
    return `${meaningful(reading, 4)} ${unit} is about 1000 times what the rig reads (${rig}): typed in m${unit}? ${meaningful(reading, 4)} m${unit} is ${meaningful(reading / 1000, 4)} ${unit}`;
  }
  if (near(reading * 1000, nominal, fullScale)) {
    return `${meaningful(reading, 4)} ${unit} is about 1000 times less than the rig reads (${rig}): check the decimal point`;
  }
  if (Math.abs(reading) > 1.5 * fullScale) {
    return `${meaningful(reading, 4)} ${unit} is beyond the channel's full scale of ${meaningful(fullScale, 3)} ${unit}, where the rig reads ${rig}`;
  }
  return `${meaningful(reading, 4)} ${unit} is far from the ${rig} the rig reads (a board is seldom off by more than a factor of ${RATIO_BAND.high}): check the reading, the meter's range and the wiring`;
}
