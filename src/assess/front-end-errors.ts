/**
 * The current channel's errors that a rig profile can predict before any calibration: the
 * op-amp's input offset referred through the shunt (an offset in amps), and the solder and
 * trace resistance in series with a two-terminal shunt (a gain error). Calibration removes
 * both; `assess` shows their size so a builder knows what an uncalibrated rig reads.
 */
import type { AnalogChain } from '../chain/analog-chain.js';
import type { RigProfile } from '../chain/rig-profile-types.js';

export interface FrontEndErrors {
  /** input_offset_V / shunt_ohm: amps read with no current flowing (sign as the profile gives it). */
  offset_A?: number;
  /** The same offset in ADC counts. */
  offset_counts?: number;
  /** connection_ohm / shunt_ohm: the fraction by which every current reads high. */
  connection_gain_error?: number;
}

export function frontEndErrors(profile: RigProfile, chain: AnalogChain): FrontEndErrors {
  const c = profile.current;
  const out: FrontEndErrors = {};
  if (c.input_offset_V !== undefined) {
    out.offset_A = c.input_offset_V / c.shunt_ohm;
    out.offset_counts = chain.countsForAmps(out.offset_A);
  }
  if (c.connection_ohm !== undefined) out.connection_gain_error = c.connection_ohm / c.shunt_ohm;
  return out;
}
