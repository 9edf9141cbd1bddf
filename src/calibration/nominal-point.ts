/**
 * A captured (or given) mean count turned into a calibration point: the analog chain's nominal
 * value for it and that value's standard uncertainty, next to the reference reading.
 */
import type { AnalogChain } from '../chain/analog-chain.js';
import { ErrorCodes, makeError } from '../core/errors.js';
import type { CalibrationPoint, Quantity } from './calibration.js';
import { meanUncertaintyCounts, type CountStats } from './capture.js';

/** Nominal value of a mean count and its standard uncertainty, in V, A or °C. */
export function nominalOf(
  chain: AnalogChain,
  quantity: Quantity,
  stats: CountStats,
  where: string,
): { nominal: number; u: number } {
  const uCounts = meanUncertaintyCounts(stats);
  switch (quantity) {
    case 'voltage':
      return { nominal: chain.volts(stats.mean), u: chain.voltsPerCount * uCounts };
    case 'current':
      return { nominal: chain.amps(stats.mean), u: chain.ampsPerCount * uCounts };
    case 'temperature': {
      const state = chain.thermistorState(stats.mean);
      if (state !== 'ok') {
        throw makeError(
          ErrorCodes.CALIBRATION_CAPTURE,
          `the thermistor reads ${state === 'open' ? 'open (not connected or broken)' : 'shorted'} (mean count ${stats.mean.toFixed(1)})`,
          where,
          'Check the NTC and its wiring, and ntc_position in the rig profile, then take the point again.',
        );
      }
      const nominal = chain.celsius(stats.mean);
      return { nominal, u: chain.celsiusPerCountAt(nominal) * uCounts };
    }
  }
}

/** Stats for a mean count given by hand (--from-points), with whatever spread was recorded. */
export function givenStats(raw: { mean: number; sd?: number; samples?: number }): CountStats {
  const n = raw.samples ?? 1;
  const sd = raw.sd ?? 0;
  return { n, mean: raw.mean, sd, se: sd / Math.sqrt(n), min: raw.mean, max: raw.mean };
}

export function toCalibrationPoint(
  chain: AnalogChain,
  quantity: Quantity,
  stats: CountStats,
  reference: number,
  referenceU: number,
  where: string,
): CalibrationPoint {
  const { nominal, u } = nominalOf(chain, quantity, stats, where);
  return {
    raw_mean: stats.mean,
    raw_sd: stats.sd,
    samples: stats.n,
    nominal,
    nominal_u: u,
    reference,
    reference_u: referenceU,
  };
}
