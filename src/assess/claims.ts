/**
 * Checks of a builder's claims against what the chain can do, each with the change that would
 * meet it.
 */
import type { RigProfile } from '../chain/rig-profile-types.js';
import type { ChainResolution } from './chain-resolution.js';

/** A warning when one count is worth more current than the claimed resolution. */
export function checkResolutionClaim(
  claimA: number,
  r: ChainResolution,
  profile: RigProfile,
): string | null {
  if (r.amps_per_count <= claimA) return null;
  const shunt = profile.current.shunt_ohm;
  const neededGain = r.adc_V_per_count / (claimA * shunt);
  const neededBits = Math.ceil(
    Math.log2((r.adc_V_per_count * 2 ** r.adc_bits) / (claimA * r.amplifier_gain * shunt)),
  );
  return (
    `one count of the current channel is worth ${mA(r.amps_per_count)} mA, so the chain cannot resolve ${mA(claimA)} mA. ` +
    `To resolve it: an amplifier gain of ${Number(neededGain.toPrecision(3))} or more with this ${shunt * 1000} mΩ shunt, ` +
    `or a ${neededBits}-bit ADC, or a larger shunt (mind its heat). Averaging many noisy samples narrows a mean, not a single reading.`
  );
}

function mA(a: number): string {
  return Number((a * 1000).toPrecision(3)).toString();
}
