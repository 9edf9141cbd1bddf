/**
 * Plausible ranges for physical values typed into files and options, and the slip a value
 * outside its range most likely is: a value given in milli-units (3300 for 3.3 V) or in
 * kilo-units (10 for 10 kΩ). Pure; each caller turns the finding into its own error.
 */
import { meaningful } from './meaningful.js';

export interface PlausibleRange {
  /** The unit the value must be in: V, A, Ω, K, Ah …; empty for a plain ratio such as a gain. */
  unit: string;
  min: number;
  max: number;
  /** What the range is for, in a few words ("an ADC reference"). */
  what: string;
}

function withUnit(x: number, unit: string): string {
  return unit === '' ? meaningful(x) : `${meaningful(x)} ${unit}`;
}

/** A sentence on why `value` is implausible, with the likely slip; null when it is inside the range. */
export function unitSlip(value: number, r: PlausibleRange): string | null {
  if (value >= r.min && value <= r.max) return null;
  const base = `${withUnit(value, r.unit)} is not plausible for ${r.what} (${meaningful(r.min)} to ${withUnit(r.max, r.unit)})`;
  if (r.unit === '') return base;
  const milli = value / 1000;
  if (milli >= r.min && milli <= r.max)
    return `${base}; did you mean ${withUnit(milli, r.unit)}? ${meaningful(value)} looks like m${r.unit}`;
  const kilo = value * 1000;
  if (kilo >= r.min && kilo <= r.max)
    return `${base}; did you mean ${withUnit(kilo, r.unit)}? ${meaningful(value)} looks like k${r.unit}`;
  return base;
}
