/**
 * A rig profile (config/rigs/*.yaml): the model of one board's analog chain. Keys and units are
 * a contract (docs/rig-profile.md).
 */
export interface RigProfile {
  /** Free text naming the rig. */
  name?: string;
  adc: { bits: number; vref_V: number };
  voltage: { divider_top_ohm: number; divider_bottom_ohm: number };
  /** Either amplifier_gain (non-inverting stage) or rin_ohm/rf_ohm (inverting stage, gain rf/rin). */
  current: {
    shunt_ohm: number;
    amplifier_gain?: number;
    rin_ohm?: number;
    rf_ohm?: number;
    /** Op-amp input offset voltage, for `assess` (optional). */
    input_offset_V?: number;
    /** Connection (solder, trace) resistance in series with a two-terminal shunt, for `assess`. */
    connection_ohm?: number;
  };
  temperature: {
    ntc_r25_ohm: number;
    ntc_beta_K: number;
    fixed_ohm: number;
    ntc_position: 'low' | 'high';
    /** Steinhart–Hart coefficients; when given they are used instead of the Beta equation. */
    steinhart_hart?: { a: number; b: number; c: number };
  };
  frame: { baud: number };
  /** Optional limits of this rig. */
  limits?: { max_current_A?: number };
  /**
   * A protocol 1.1 rig's chargers: while a frame's flag bit 4 says the current flows into the
   * cell, `i_raw` is the charger's current monitor, and amps = ADC volts × monitor_A_per_V.
   */
  charger?: { monitor_A_per_V: number };
}
