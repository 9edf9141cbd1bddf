import type { RigProfile } from '../chain/rig-profile-types.js';
import { makeError, ErrorCodes } from '../core/errors.js';
import { gaussian, type Rng } from './prng.js';

/**
 * The simulated board's analog front end, as physics: true volts, amps and degrees in, ADC
 * counts out. The profile gives the nominal parts; `FrontEndErrors` gives what the real board
 * does differently, which the host does not know and must calibrate away.
 */
export interface FrontEndErrors {
  /** Op-amp input offset, volts at the amplifier input; reads as offset / shunt amps. */
  inputOffsetV: number;
  /** Solder and trace resistance in series with the two-terminal shunt: gain error connection / shunt. */
  connectionOhm: number;
  /** Fractional error of the cell-voltage divider ratio (+0.01 reads 1 % high). */
  voltageGainError: number;
  /** Standard deviation of ADC noise, counts, on every channel. */
  noiseCounts: number;
}

/** One conversion, with its intermediate voltages for inspection. */
export interface ChainReading {
  /** Volts at the sensing element: divider tap, shunt (with connection), or NTC divider tap. */
  sensedV: number;
  /** Volts at the ADC pin. */
  adcV: number;
  counts: number;
}

const KELVIN = 273.15;

/** NTC resistance by the Beta equation: R = R25 · exp(B · (1/T − 1/298.15 K)). */
export function ntcOhm(tempC: number, r25Ohm: number, betaK: number): number {
  return r25Ohm * Math.exp(betaK * (1 / (tempC + KELVIN) - 1 / (25 + KELVIN)));
}

/** Quantises by floor, as a successive-approximation ADC does, and clamps to 0..2^bits−1. */
export function adcCounts(volts: number, vrefV: number, bits: number, noiseCounts = 0): number {
  const full = 2 ** bits;
  const n = Math.floor((volts / vrefV) * full + noiseCounts);
  return Math.min(full - 1, Math.max(0, n));
}

/** Gain of the current amplifier stage; an inverting stage is wired so the ADC sees it positive. */
export function amplifierGain(profile: RigProfile): number {
  const c = profile.current;
  if (c.amplifier_gain !== undefined) return c.amplifier_gain;
  if (c.rin_ohm !== undefined && c.rf_ohm !== undefined) return Math.abs(c.rf_ohm / c.rin_ohm);
  throw makeError(
    ErrorCodes.CONFIG_INVALID,
    'the rig profile gives no current amplifier gain',
    `rig profile "${profile.name ?? 'unnamed'}", key current`,
    'Set current.amplifier_gain, or current.rin_ohm and current.rf_ohm for an inverting stage.',
  );
}

export class FrontEnd {
  private readonly gain: number;

  constructor(
    private readonly profile: RigProfile,
    private readonly errors: FrontEndErrors,
    private readonly rng: Rng,
  ) {
    this.gain = amplifierGain(profile);
  }

  /** Cell terminal volts through the divider. */
  voltage(cellV: number): ChainReading {
    const { divider_top_ohm: top, divider_bottom_ohm: bottom } = this.profile.voltage;
    const sensedV = ((cellV * bottom) / (top + bottom)) * (1 + this.errors.voltageGainError);
    return this.convert(sensedV, sensedV);
  }

  /** Load current through shunt plus connection resistance, then offset and gain of the op-amp. */
  current(currentA: number): ChainReading {
    const sensedV = currentA * (this.profile.current.shunt_ohm + this.errors.connectionOhm);
    // A single-supply amplifier cannot swing below ground.
    const adcV = Math.max(0, this.gain * (sensedV + this.errors.inputOffsetV));
    return this.convert(sensedV, adcV);
  }

  /**
   * The true current whose reading is `counts` without noise: what a rig's trim closes on (it
   * holds the current it measures at the setpoint, so the board's own errors stay in the
   * current it really draws).
   */
  currentForCounts(counts: number): number {
    const full = 2 ** this.profile.adc.bits;
    // Mid-count: a floor-quantising ADC reads `counts` across [counts, counts + 1).
    const adcV = ((counts + 0.5) / full) * this.profile.adc.vref_V;
    return (
      (adcV / this.gain - this.errors.inputOffsetV) /
      (this.profile.current.shunt_ohm + this.errors.connectionOhm)
    );
  }

  /** A charger's current monitor output: `aPerV` amps per volt at the ADC pin. */
  chargerMonitor(currentA: number, aPerV: number): ChainReading {
    const adcV = Math.max(0, currentA / aPerV);
    return this.convert(adcV, adcV);
  }

  /** Cell temperature through the NTC and its fixed resistor, ratiometric to the reference. */
  temperature(tempC: number): ChainReading {
    const t = this.profile.temperature;
    const rNtc = ntcOhm(tempC, t.ntc_r25_ohm, t.ntc_beta_K);
    const lower = t.ntc_position === 'low' ? rNtc : t.fixed_ohm;
    const adcV = (this.profile.adc.vref_V * lower) / (rNtc + t.fixed_ohm);
    return this.convert(adcV, adcV);
  }

  private convert(sensedV: number, adcV: number): ChainReading {
    const noise = this.errors.noiseCounts > 0 ? this.errors.noiseCounts * gaussian(this.rng) : 0;
    return {
      sensedV,
      adcV,
      counts: adcCounts(adcV, this.profile.adc.vref_V, this.profile.adc.bits, noise),
    };
  }
}
