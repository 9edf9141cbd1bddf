/**
 * Rated-capacity checks in the manner of the IEC methods (clause wording from memory, see
 * docs/report.md): discharge at 0.2 It to the end voltage at 20 ± 5 °C; the cell meets its
 * rating when the discharge lasts at least 5 h. These are checks against a standard's method,
 * never a certification; when the run did not follow the method the check says so instead.
 */
export interface VerdictInput {
  chemistryId: string;
  cells: number;
  /** The run's end-of-discharge voltage per cell. */
  cutoffPerCellV: number;
  ratedAh: number | null;
  /** Mean current over the load-on time, A. */
  averageCurrentA: number;
  /** Lowest and highest loaded current (after the first seconds), A. */
  minCurrentA: number;
  maxCurrentA: number;
  /** Load-on time, s. */
  durationS: number;
  endReason: string;
  /** Cell temperature at rest before the load went on, °C; null when unknown. */
  startTemperatureC: number | null;
  /** How many times the load was switched on (1 for one continuous discharge). */
  loadSwitchOns: number;
  /** Allowed relative deviation of the mean current from 0.2 It. @default 0.05 */
  rateTolerance?: number;
}

export type VerdictOutcome = 'meets' | 'does_not_meet' | 'method_not_followed' | 'incomplete';

export interface Verdict {
  standard: string;
  /** "a check against the method of <standard>, not a certification". */
  label: string;
  method: string;
  outcome: VerdictOutcome;
  /** One line: the outcome in words. */
  summary: string;
  /** Why the method was not followed, or what the outcome rests on. */
  reasons: string[];
  /** Things the run cannot show (the charge before it, for instance). */
  cautions: string[];
  /** 0.2 It for the rating given, A. */
  methodCurrentA: number | null;
  requiredHours: 5;
  hours: number;
}

interface Method {
  standard: string;
  /** Required end voltage per cell, or null when the maker states it. */
  endPerCellV: number | null;
  charge: string;
}

const METHODS: Record<string, Method> = {
  nimh: {
    standard: 'IEC 61951-2',
    endPerCellV: 1.0,
    charge: 'charged at 0.1 It for 16 h and rested 1 to 4 h before the discharge',
  },
  nicd: {
    standard: 'IEC 61951-1',
    endPerCellV: 1.0,
    charge: 'charged at 0.1 It for 16 h and rested 1 to 4 h before the discharge',
  },
  'li-ion': {
    standard: 'IEC 61960-3',
    endPerCellV: null,
    charge: "charged by the maker's method before the discharge",
  },
  lifepo4: {
    standard: 'IEC 61960-3',
    endPerCellV: null,
    charge: "charged by the maker's method before the discharge",
  },
};

/** The chemistries a rated-capacity check exists for. */
export function verdictStandard(chemistryId: string): string | null {
  return METHODS[chemistryId]?.standard ?? null;
}

export const REQUIRED_HOURS = 5;
export const DEFAULT_RATE_TOLERANCE = 0.05;
const TEMPERATURE_LOW_C = 15;
const TEMPERATURE_HIGH_C = 25;
/** How close the run's cutoff must be to the method's end voltage, V per cell. */
const END_VOLTAGE_SLACK_V = 0.005;

const f = (x: number, d: number): string => x.toFixed(d);

/** The check for this run, or null when no rated-capacity method applies to the chemistry. */
export function ratedCapacityVerdict(x: VerdictInput): Verdict | null {
  const m = METHODS[x.chemistryId];
  if (!m) return null;
  const tolerance = x.rateTolerance ?? DEFAULT_RATE_TOLERANCE;
  const hours = x.durationS / 3600;
  const methodCurrentA = x.ratedAh !== null ? 0.2 * x.ratedAh : null;
  const endText =
    m.endPerCellV !== null
      ? `${f(m.endPerCellV, 1)} V per cell`
      : `the maker's end voltage (taken as this run's cutoff, ${f(x.cutoffPerCellV, 2)} V per cell)`;
  const spread: string[] = [];
  if (
    methodCurrentA !== null &&
    (x.minCurrentA < methodCurrentA * (1 - tolerance) ||
      x.maxCurrentA > methodCurrentA * (1 + tolerance))
  ) {
    spread.push(
      `The loaded current ranged from ${f(x.minCurrentA, 3)} A to ${f(x.maxCurrentA, 3)} A against 0.2 It = ${f(methodCurrentA, 3)} A; the method holds it constant, a resistor load lets it fall with the voltage.`,
    );
  }
  const verdict = (outcome: VerdictOutcome, summary: string, reasons: string[]): Verdict => ({
    standard: m.standard,
    label: `a check against the method of ${m.standard}, not a certification`,
    method: `discharge at 0.2 It to ${endText} at 20 ± 5 °C; the rating is met when the discharge lasts at least ${REQUIRED_HOURS} h`,
    outcome,
    summary,
    reasons,
    cautions: [
      `The method asks for the cell to have been ${m.charge}; the run folder cannot show that.`,
      ...spread,
    ],
    methodCurrentA,
    requiredHours: REQUIRED_HOURS,
    hours,
  });

  const deviations: string[] = [];
  if (x.ratedAh === null) {
    deviations.push('no rated capacity was given (--rated <Ah>), so 0.2 It is not known');
  } else {
    const ratio = x.averageCurrentA / methodCurrentA!;
    const dev = ratio - 1;
    if (Math.abs(dev) > tolerance) {
      const off =
        ratio > 2 || ratio < 0.5
          ? `${f(ratio, 2)} times`
          : `${dev > 0 ? '+' : ''}${f(dev * 100, 1)} % from`;
      deviations.push(
        `the mean current was ${f(x.averageCurrentA, 3)} A, ${off} 0.2 It = ${f(methodCurrentA!, 3)} A (allowed here: ±${f(tolerance * 100, 0)} %)`,
      );
    }
  }
  if (m.endPerCellV !== null && Math.abs(x.cutoffPerCellV - m.endPerCellV) > END_VOLTAGE_SLACK_V) {
    deviations.push(
      `the run ended at ${f(x.cutoffPerCellV, 3)} V per cell; the method ends at ${f(m.endPerCellV, 1)} V per cell`,
    );
  }
  if (x.startTemperatureC === null) {
    deviations.push('the cell temperature is unknown, so 20 ± 5 °C cannot be confirmed');
  } else if (x.startTemperatureC < TEMPERATURE_LOW_C || x.startTemperatureC > TEMPERATURE_HIGH_C) {
    deviations.push(
      `the cell was at ${f(x.startTemperatureC, 1)} °C at the start, outside 20 ± 5 °C`,
    );
  }
  if (x.loadSwitchOns > 1)
    deviations.push(
      `the load was switched on ${x.loadSwitchOns} times; the method is one continuous discharge`,
    );
  if (deviations.length > 0) {
    return verdict(
      'method_not_followed',
      `No verdict: the run did not follow the method of ${m.standard}.`,
      deviations,
    );
  }
  const basis = `mean current ${f(x.averageCurrentA, 3)} A against 0.2 It = ${f(methodCurrentA!, 3)} A; ${x.startTemperatureC!.toFixed(1)} °C at the start`;
  if (hours >= REQUIRED_HOURS) {
    const stopped =
      x.endReason !== 'cutoff'
        ? ` (the run was stopped by ${x.endReason} after that, before the end voltage)`
        : '';
    return verdict(
      'meets',
      `Meets its rating: the discharge lasted ${f(hours, 2)} h, at least ${REQUIRED_HOURS} h${stopped}.`,
      [basis],
    );
  }
  if (x.endReason === 'cutoff') {
    return verdict(
      'does_not_meet',
      `Does not meet its rating: the discharge reached the end voltage after ${f(hours, 2)} h, less than ${REQUIRED_HOURS} h.`,
      [basis],
    );
  }
  return verdict(
    'incomplete',
    `No verdict: the run ended (${x.endReason}) after ${f(hours, 2)} h, before the end voltage and before ${REQUIRED_HOURS} h.`,
    [basis],
  );
}
