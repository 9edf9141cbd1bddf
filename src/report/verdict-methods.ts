/*
 * The rated-capacity methods the report checks against, as recalled (from memory, not the
 * standards' text): discharge at a constant 0.2 It to the end voltage at 20 ± 5 °C; the rating
 * is met when the discharge lasts at least 5 h. The standards' general test conditions hold a
 * controlled current within ±1 % of its value (from memory); a resistor load, whose current
 * falls with the voltage, is not that discharge.
 */

export interface Method {
  standard: string;
  /** Required end voltage per cell, or null when the maker states it. */
  endPerCellV: number | null;
  charge: string;
  /** The clause the discharge follows, as recalled. */
  clause: string;
  /** The clause the current tolerance comes from, as recalled. */
  toleranceClause: string;
}

const nickel = (standard: string): Method => ({
  standard,
  endPerCellV: 1.0,
  charge: 'charged at 0.1 It for 16 h and rested 1 to 4 h before the discharge',
  clause: `${standard} rated capacity: discharge at 0.2 It to 1.0 V per cell at 20 ± 5 °C, at least 5 h (from memory)`,
  toleranceClause: `${standard} general test conditions: a controlled current within ±1 % (from memory)`,
});

const lithium: Method = {
  standard: 'IEC 61960-3',
  endPerCellV: null,
  charge: "charged by the maker's method before the discharge",
  clause:
    "IEC 61960-3 rated capacity: discharge at 0.2 It to the maker's end-of-discharge voltage at 20 ± 5 °C, at least 5 h (from memory)",
  toleranceClause:
    'IEC 61960-3 general test conditions: a controlled current within ±1 % (from memory)',
};

export const METHODS: Readonly<Record<string, Method>> = {
  nimh: nickel('IEC 61951-2'),
  nicd: nickel('IEC 61951-1'),
  'li-ion': lithium,
  lifepo4: lithium,
};

export const REQUIRED_HOURS = 5;
/** The standards' tolerance on a controlled current (from memory). */
export const STANDARD_CURRENT_TOLERANCE = 0.01;
export const TEMPERATURE_LOW_C = 15;
export const TEMPERATURE_HIGH_C = 25;
/** How close the run's cutoff must be to the method's end voltage, V per cell. */
export const END_VOLTAGE_SLACK_V = 0.005;
