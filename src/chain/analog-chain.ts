/**
 * The model of a rig's analog front end (docs/rig-profile.md): raw ADC counts to nominal
 * cell volts, load amps and thermistor °C, and back. Runs once per frame, so every constant is
 * worked out in the constructor.
 */
import { ErrorCodes, makeError } from '../core/errors.js';
import type { RigProfile } from './rig-profile-types.js';
import {
  betaCelsius,
  betaResistance,
  steinhartHartCelsius,
  steinhartHartResistance,
  type SteinhartHart,
} from './thermistor.js';

export type ThermistorState = 'ok' | 'open' | 'short';

/**
 * Share of the ADC span next to either rail where a thermistor reading is taken for a broken
 * (open) or shorted sensor rather than a temperature: 0.5 % is beyond −40…200 °C for any
 * sensible NTC/fixed pairing.
 */
const RAIL_FRACTION = 0.005;

export class AnalogChain {
  readonly bits: number;
  /** Largest count the ADC can report, 2^bits − 1. */
  readonly maxCount: number;
  /** ADC input volts per count: vref / 2^bits. */
  readonly adcVoltsPerCount: number;
  /** Cell volts per count, through the divider. */
  readonly voltsPerCount: number;
  /** Load amps per count, through the amplifier and shunt. */
  readonly ampsPerCount: number;
  /** Voltage gain of the current amplifier (rf / rin for an inverting stage). */
  readonly amplifierGain: number;

  readonly #span: number;
  readonly #fixedOhm: number;
  readonly #ntcLow: boolean;
  readonly #railCounts: number;
  readonly #ohmToCelsius: (ohm: number) => number;
  readonly #celsiusToOhm: (celsius: number) => number;

  constructor(profile: RigProfile) {
    const { adc, voltage, current, temperature } = profile;
    const gain =
      current.amplifier_gain ??
      (current.rf_ohm !== undefined && current.rin_ohm !== undefined
        ? current.rf_ohm / current.rin_ohm
        : undefined);
    if (gain === undefined) {
      throw makeError(
        ErrorCodes.CONFIG_INVALID,
        'the current channel has no amplifier gain',
        `rig profile ${profile.name ?? '(unnamed)'}: current`,
        'Give current.amplifier_gain, or current.rin_ohm and current.rf_ohm for an inverting stage.',
      );
    }
    this.bits = adc.bits;
    this.#span = 2 ** adc.bits;
    this.maxCount = this.#span - 1;
    this.adcVoltsPerCount = adc.vref_V / this.#span;
    this.voltsPerCount =
      (this.adcVoltsPerCount * (voltage.divider_top_ohm + voltage.divider_bottom_ohm)) /
      voltage.divider_bottom_ohm;
    this.amplifierGain = gain;
    this.ampsPerCount = this.adcVoltsPerCount / (gain * current.shunt_ohm);

    this.#fixedOhm = temperature.fixed_ohm;
    this.#ntcLow = temperature.ntc_position === 'low';
    this.#railCounts = RAIL_FRACTION * this.#span;
    const sh: SteinhartHart | undefined = temperature.steinhart_hart;
    const r25 = temperature.ntc_r25_ohm;
    const beta = temperature.ntc_beta_K;
    this.#ohmToCelsius = sh ? (r) => steinhartHartCelsius(r, sh) : (r) => betaCelsius(r, r25, beta);
    this.#celsiusToOhm = sh
      ? (t) => steinhartHartResistance(t, sh)
      : (t) => betaResistance(t, r25, beta);
  }

  /** Nominal cell volts for a raw voltage count. */
  volts(vRaw: number): number {
    return vRaw * this.voltsPerCount;
  }

  /** Nominal load amps for a raw current count. */
  amps(iRaw: number): number {
    return iRaw * this.ampsPerCount;
  }

  /** Whether a thermistor count is a usable reading or sits at a rail (sensor open or shorted). */
  thermistorState(tRaw: number): ThermistorState {
    const nearZero = tRaw <= this.#railCounts;
    const nearTop = tRaw >= this.#span - this.#railCounts;
    if (!nearZero && !nearTop) return 'ok';
    // Low: the NTC pulls the input to ground, so 0 counts is a short and the top an open circuit.
    return nearZero === this.#ntcLow ? 'short' : 'open';
  }

  /** NTC resistance in ohms from the divider, for a raw thermistor count. */
  ntcOhms(tRaw: number): number {
    const below = tRaw;
    const above = this.#span - tRaw;
    return this.#ntcLow ? (this.#fixedOhm * below) / above : (this.#fixedOhm * above) / below;
  }

  /** Nominal thermistor °C for a raw count; NaN when the sensor reads open or shorted. */
  celsius(tRaw: number): number {
    if (this.thermistorState(tRaw) !== 'ok') return Number.NaN;
    return this.#ohmToCelsius(this.ntcOhms(tRaw));
  }

  /** Highest readings the chain can show (at the top count, 2^bits − 1). */
  fullScale(): { volts: number; amps: number } {
    return { volts: this.maxCount * this.voltsPerCount, amps: this.maxCount * this.ampsPerCount };
  }

  /** Counts (fractional, unclamped) the ADC would read for `volts` at the cell. */
  countsForVolts(volts: number): number {
    return volts / this.voltsPerCount;
  }

  /** Counts (fractional, unclamped) the ADC would read for `amps` through the shunt. */
  countsForAmps(amps: number): number {
    return amps / this.ampsPerCount;
  }

  /** Counts (fractional) the ADC would read with the thermistor at `celsius`. */
  countsForCelsius(celsius: number): number {
    const r = this.#celsiusToOhm(celsius);
    const share = this.#ntcLow ? r / (r + this.#fixedOhm) : this.#fixedOhm / (r + this.#fixedOhm);
    return share * this.#span;
  }

  /** Temperature step of one count at `celsius` (the NTC divider is not linear, so it varies). */
  celsiusPerCountAt(celsius: number): number {
    const h = 0.5;
    return (
      (2 * h) / Math.abs(this.countsForCelsius(celsius + h) - this.countsForCelsius(celsius - h))
    );
  }
}
