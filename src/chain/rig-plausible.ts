/**
 * Values a rig profile can hold by its schema but no real board has: most often a unit slip
 * (vref_V: 3300 for 3.3 V, ntc_r25_ohm: 10 for 10 kΩ, shunt_ohm: 20 for 20 mΩ is not caught:
 * 20 Ω is a real shunt for small currents). Checked after the schema, before any chain is built.
 */
import { ErrorCodes, makeError } from '../core/errors.js';
import { unitSlip, type PlausibleRange } from '../core/unit-slip.js';
import type { RigProfile } from './rig-profile-types.js';

/** Ranges wide enough for any board of the trade (common practice). */
const RANGES: Record<string, PlausibleRange> = {
  'adc.vref_V': { unit: 'V', min: 0.5, max: 6, what: 'an ADC reference' },
  'voltage.divider_top_ohm': { unit: 'Ω', min: 0, max: 10e6, what: 'a divider resistor' },
  'voltage.divider_bottom_ohm': { unit: 'Ω', min: 100, max: 10e6, what: 'a divider resistor' },
  'current.shunt_ohm': { unit: 'Ω', min: 1e-4, max: 100, what: 'a current shunt' },
  'current.amplifier_gain': { unit: '', min: 1, max: 1000, what: 'an amplifier gain' },
  'current.rin_ohm': { unit: 'Ω', min: 10, max: 10e6, what: "an amplifier's input resistor" },
  'current.rf_ohm': { unit: 'Ω', min: 10, max: 10e6, what: "an amplifier's feedback resistor" },
  'current.input_offset_V': { unit: 'V', min: -0.05, max: 0.05, what: "an op-amp's input offset" },
  'current.connection_ohm': { unit: 'Ω', min: 0, max: 1, what: 'a connection resistance' },
  'temperature.ntc_r25_ohm': { unit: 'Ω', min: 100, max: 1e6, what: 'an NTC at 25 °C' },
  'temperature.ntc_beta_K': { unit: 'K', min: 1500, max: 6000, what: "an NTC's Beta value" },
  'temperature.fixed_ohm': { unit: 'Ω', min: 100, max: 1e6, what: 'a thermistor divider resistor' },
  'frame.baud': { unit: '', min: 300, max: 4_000_000, what: 'a serial speed in baud' },
  'limits.max_current_A': { unit: 'A', min: 0.001, max: 200, what: "a rig's current limit" },
};

function valueAt(profile: RigProfile, path: string): unknown {
  let v: unknown = profile;
  for (const key of path.split('.'))
    v = v !== null && typeof v === 'object' ? (v as Record<string, unknown>)[key] : undefined;
  return v;
}

/** Throws CV_CONFIG_INVALID listing every implausible value with its likely slip. */
export function checkRigPlausible(profile: RigProfile, where: string): void {
  const problems: string[] = [];
  for (const [path, range] of Object.entries(RANGES)) {
    const v = valueAt(profile, path);
    if (typeof v !== 'number') continue;
    const slip = unitSlip(v, range);
    if (slip) problems.push(`${path}: ${slip}`);
  }
  if (problems.length === 0) return;
  throw makeError(
    ErrorCodes.CONFIG_INVALID,
    problems.join('; '),
    where,
    'Give each value in the unit its key names (_V volts, _ohm ohms, _K kelvin, _A amps); docs/rig-profile.md lists them.',
  );
}
