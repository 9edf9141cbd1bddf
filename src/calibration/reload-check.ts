/**
 * A calibration edited while a run goes on: it must be one `calibrate` could have written, and
 * it must not move the readings at the present operating point by more than a plausible
 * re-calibration would. A file that does (an offset of −1 A, a gain typed wrong) would silently
 * change the charge, or make a loaded cell look charged, from the next sample on.
 */
import { applyCalibration, type Calibration, type Quantity } from './calibration.js';
import { gainProblem } from './plausible.js';

/** An offset beyond this fraction of the channel's full scale is no real board's. */
export const OFFSET_MAX_FRACTION_OF_FULL_SCALE = 0.1;
/**
 * The most a reload may move a corrected voltage or current at the present operating point:
 * this fraction of the reading, or `RELOAD_MAX_MOVE_COUNTS` counts of the channel when that is
 * more. A fresh calibration of the same board moves it by well under 1 %; 5 % allows a first
 * calibration replacing the nominal chain, whose parts are commonly 1 to 5 % off.
 */
export const RELOAD_MAX_MOVE_FRACTION = 0.05;
export const RELOAD_MAX_MOVE_COUNTS = 4;
/** The most a reload may move the corrected temperature, °C (it guards the temperature limit). */
export const RELOAD_MAX_MOVE_C = 2;

export interface OperatingPoint {
  /** The last frame's nominal readings (through the analog chain, before the calibration). */
  volts: number;
  amps: number;
  celsius: number | null;
  loadOn: boolean;
}

export interface ChannelScale {
  fullScale: { volts: number; amps: number };
  voltsPerCount: number;
  ampsPerCount: number;
}

/** Why `next` may not replace `current` mid-run, or null when it may. */
export function reloadProblem(
  current: Calibration | null,
  next: Calibration,
  scale: ChannelScale,
  at: OperatingPoint | null,
): string | null {
  for (const q of ['voltage', 'current'] as const) {
    const fit = next[q]?.fit;
    if (!fit) continue;
    if (fit.model === 'gain_offset') {
      const g = gainProblem(q, fit.gain);
      if (g !== null) return g;
    }
    const fs = q === 'voltage' ? scale.fullScale.volts : scale.fullScale.amps;
    if (Math.abs(fit.offset) > OFFSET_MAX_FRACTION_OF_FULL_SCALE * fs)
      return `the ${q} offset ${fit.offset} ${q === 'voltage' ? 'V' : 'A'} is more than ${OFFSET_MAX_FRACTION_OF_FULL_SCALE * 100} % of the channel's full scale (${fs.toFixed(3)})`;
  }
  return at === null ? null : moveProblem(current, next, scale, at);
}

function moveProblem(
  current: Calibration | null,
  next: Calibration,
  scale: ChannelScale,
  at: OperatingPoint,
): string | null {
  const was = applyCalibration(current);
  const will = applyCalibration(next);
  const amps = will.current(at.amps);
  if (at.loadOn && amps < 0)
    return `with the load on it would read ${amps.toFixed(4)} A, current flowing into the cell`;
  const checks: [Quantity, number, number, number, string][] = [
    ['voltage', was.voltage(at.volts), will.voltage(at.volts), scale.voltsPerCount, 'V'],
    ['current', was.current(at.amps), amps, scale.ampsPerCount, 'A'],
  ];
  for (const [q, before, after, perCount, unit] of checks) {
    const allowed = Math.max(
      RELOAD_MAX_MOVE_FRACTION * Math.abs(before),
      RELOAD_MAX_MOVE_COUNTS * perCount,
    );
    if (Math.abs(after - before) > allowed)
      return `it would move the ${q} reading from ${before.toFixed(4)} to ${after.toFixed(4)} ${unit}, more than the ${allowed.toFixed(4)} ${unit} a reload may (${RELOAD_MAX_MOVE_FRACTION * 100} % of the reading or ${RELOAD_MAX_MOVE_COUNTS} counts)`;
  }
  if (at.celsius !== null) {
    const before = was.temperature(at.celsius);
    const after = will.temperature(at.celsius);
    if (Math.abs(after - before) > RELOAD_MAX_MOVE_C)
      return `it would move the temperature reading from ${before.toFixed(1)} to ${after.toFixed(1)} °C, more than the ${RELOAD_MAX_MOVE_C} °C a reload may`;
  }
  return null;
}
