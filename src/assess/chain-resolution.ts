/**
 * What one ADC count is worth on each channel of a rig profile, and the highest readings the
 * chain can show. The thermistor divider is not linear, so its step is given at several
 * temperatures.
 */
import type { AnalogChain } from '../chain/analog-chain.js';

/** Temperatures at which the thermistor's step is reported by default, °C. */
export const DEFAULT_ASSESS_TEMPERATURES: readonly number[] = [0, 25, 45, 60];

export interface ChainResolution {
  adc_bits: number;
  adc_V_per_count: number;
  amplifier_gain: number;
  volts_per_count: number;
  amps_per_count: number;
  full_scale_V: number;
  full_scale_A: number;
  degrees_per_count: { celsius: number; per_count: number }[];
}

export function chainResolution(
  chain: AnalogChain,
  temperatures: readonly number[] = DEFAULT_ASSESS_TEMPERATURES,
): ChainResolution {
  const fs = chain.fullScale();
  return {
    adc_bits: chain.bits,
    adc_V_per_count: chain.adcVoltsPerCount,
    amplifier_gain: chain.amplifierGain,
    volts_per_count: chain.voltsPerCount,
    amps_per_count: chain.ampsPerCount,
    full_scale_V: fs.volts,
    full_scale_A: fs.amps,
    degrees_per_count: temperatures.map((celsius) => ({
      celsius,
      per_count: chain.celsiusPerCountAt(celsius),
    })),
  };
}
