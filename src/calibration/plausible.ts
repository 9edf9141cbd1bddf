/**
 * The same bounds on a calibration when it is loaded (by `run`, `report`, `assess`, a reload)
 * as when `calibrate` fits it: a gain this far from 1 means readings in the wrong unit or a rig
 * profile that does not describe the board, whoever wrote or edited the file.
 */
import { ErrorCodes, makeError } from '../core/errors.js';
import { meaningful } from '../core/meaningful.js';
import type { CalibrationContent, Quantity } from './calibration.js';

/** Gains outside this band are refused, by calibrate and at load alike. */
export const GAIN_RANGE = { low: 0.5, high: 2 } as const;

const UNIT: Record<Quantity, string> = { voltage: 'V', current: 'A', temperature: '°C' };

/** Why a fitted gain cannot be a real board's, or null when it is inside GAIN_RANGE. */
export function gainProblem(quantity: Quantity, gain: number): string | null {
  if (gain >= GAIN_RANGE.low && gain <= GAIN_RANGE.high) return null;
  const factor =
    gain > 0
      ? `the reference differs from the rig by a factor of ${meaningful(gain)}`
      : "the reference falls as the rig's reading rises";
  const slip =
    gain > 300 && gain < 3000
      ? ` (about 1000: readings typed in m${UNIT[quantity]}?)`
      : gain > 1 / 3000 && gain < 1 / 300
        ? ` (about 1/1000: readings typed in k${UNIT[quantity]}, or a decimal point off?)`
        : '';
  return `the ${quantity} gain is ${meaningful(gain)}, outside ${GAIN_RANGE.low} to ${GAIN_RANGE.high}: ${factor}${slip}`;
}

/** Throws CV_CALIBRATION_INVALID when a quantity's gain is one calibrate would have refused. */
export function checkCalibrationPlausible(cal: CalibrationContent, where: string): void {
  for (const q of ['voltage', 'current', 'temperature'] as const) {
    const fit = cal[q]?.fit;
    if (!fit || fit.model !== 'gain_offset') continue;
    const problem = gainProblem(q, fit.gain);
    if (problem === null) continue;
    throw makeError(
      ErrorCodes.CALIBRATION_INVALID,
      `${problem}; calibrate refuses such a fit`,
      `${where}, ${q}.fit.gain`,
      `Check that the readings were in ${UNIT[q]} (not m${UNIT[q]}) and that the rig profile (--rig) describes this board, then calibrate again; a file edited by hand must keep the gain within ${GAIN_RANGE.low} to ${GAIN_RANGE.high}.`,
    );
  }
}
