/**
 * Rated-capacity checks in the manner of the IEC methods (verdict-methods.ts, from memory):
 * a verdict only when the discharge was the method's, a constant 0.2 It within the standards'
 * current tolerance to the end voltage at 20 ± 5 °C; otherwise the reasons there is none.
 * These are checks against a standard's method, never a certification.
 */
import {
  END_VOLTAGE_SLACK_V,
  METHODS,
  REQUIRED_HOURS,
  STANDARD_CURRENT_TOLERANCE,
  TEMPERATURE_HIGH_C,
  TEMPERATURE_LOW_C,
  type Method,
} from './verdict-methods.js';

export { REQUIRED_HOURS };

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
  /** Allowed relative deviation of the current from 0.2 It. @default 0.01 (the standards', from memory) */
  rateTolerance?: number;
}

export type VerdictOutcome = 'meets' | 'does_not_meet' | 'method_not_followed' | 'incomplete';

export interface Verdict {
  standard: string;
  /** "a check against the method of <standard>, not a certification". */
  label: string;
  method: string;
  /** The clauses the check follows, as recalled. */
  clause: string;
  outcome: VerdictOutcome;
  /** One line: the outcome in words. */
  summary: string;
  /** Why the method was not followed, or what the outcome rests on. */
  reasons: string[];
  /** Things the run cannot show (the charge before it, for instance). */
  cautions: string[];
  /** 0.2 It for the rating given, A. */
  methodCurrentA: number | null;
  requiredHours: typeof REQUIRED_HOURS;
  hours: number;
}

/** The chemistries a rated-capacity check exists for. */
export function verdictStandard(chemistryId: string): string | null {
  return METHODS[chemistryId]?.standard ?? null;
}

export const DEFAULT_RATE_TOLERANCE = STANDARD_CURRENT_TOLERANCE;

const f = (x: number, d: number): string => x.toFixed(d);
const pct = (t: number): string => `±${Number((t * 100).toFixed(2))} %`;

/** What was off in the current: its mean, or its constancy. Empty when it was the method's. */
function currentDeviations(x: VerdictInput, m: Method, tol: number, methodA: number): string[] {
  const ratio = x.averageCurrentA / methodA;
  const dev = ratio - 1;
  const target = `0.2 It = ${f(methodA, 3)} A`;
  if (Math.abs(dev) > tol) {
    const off =
      ratio > 2 || ratio < 0.5
        ? `${f(ratio, 2)} times`
        : `${dev > 0 ? '+' : ''}${f(dev * 100, 1)} % from`;
    return [
      `the mean current was ${f(x.averageCurrentA, 3)} A, ${off} ${target} (allowed: ${pct(tol)})`,
    ];
  }
  if (x.minCurrentA >= methodA * (1 - tol) && x.maxCurrentA <= methodA * (1 + tol)) return [];
  return [
    `the current was not constant: it ranged from ${f(x.minCurrentA, 3)} A to ${f(x.maxCurrentA, 3)} A against ${target} ${pct(tol)} (${m.toleranceClause}); a resistor load lets it fall with the voltage, a constant-current load holds it`,
  ];
}

/** Every way the run departed from the method; empty when it followed it. */
function deviations(x: VerdictInput, m: Method, tol: number): string[] {
  const out: string[] = [];
  if (x.ratedAh === null)
    out.push('no rated capacity was given (--rated <Ah>), so 0.2 It is not known');
  else out.push(...currentDeviations(x, m, tol, 0.2 * x.ratedAh));
  if (m.endPerCellV !== null && Math.abs(x.cutoffPerCellV - m.endPerCellV) > END_VOLTAGE_SLACK_V)
    out.push(
      `the run ended at ${f(x.cutoffPerCellV, 3)} V per cell; the method ends at ${f(m.endPerCellV, 1)} V per cell`,
    );
  if (x.startTemperatureC === null)
    out.push('the cell temperature is unknown, so 20 ± 5 °C cannot be confirmed');
  else if (x.startTemperatureC < TEMPERATURE_LOW_C || x.startTemperatureC > TEMPERATURE_HIGH_C)
    out.push(`the cell was at ${f(x.startTemperatureC, 1)} °C at the start, outside 20 ± 5 °C`);
  if (x.loadSwitchOns > 1)
    out.push(
      `the load was switched on ${x.loadSwitchOns} times; the method is one continuous discharge`,
    );
  return out;
}

/** The outcome of a run that followed the method. */
function outcomeOf(x: VerdictInput, hours: number): { outcome: VerdictOutcome; summary: string } {
  if (hours >= REQUIRED_HOURS) {
    const stopped =
      x.endReason !== 'cutoff'
        ? ` (the run was stopped by ${x.endReason} after that, before the end voltage)`
        : '';
    return {
      outcome: 'meets',
      summary: `Meets its rating: the discharge lasted ${f(hours, 2)} h, at least ${REQUIRED_HOURS} h${stopped}.`,
    };
  }
  if (x.endReason === 'cutoff')
    return {
      outcome: 'does_not_meet',
      summary: `Does not meet its rating: the discharge reached the end voltage after ${f(hours, 2)} h, less than ${REQUIRED_HOURS} h.`,
    };
  return {
    outcome: 'incomplete',
    summary: `No verdict: the run ended (${x.endReason}) after ${f(hours, 2)} h, before the end voltage and before ${REQUIRED_HOURS} h.`,
  };
}

/** The check for this run, or null when no rated-capacity method applies to the chemistry. */
export function ratedCapacityVerdict(x: VerdictInput): Verdict | null {
  const m = METHODS[x.chemistryId];
  if (!m) return null;
  const tol = x.rateTolerance ?? DEFAULT_RATE_TOLERANCE;
  const hours = x.durationS / 3600;
  const methodCurrentA = x.ratedAh !== null ? 0.2 * x.ratedAh : null;
  const endText =
    m.endPerCellV !== null
      ? `${f(m.endPerCellV, 1)} V per cell`
      : `the maker's end voltage (taken as this run's cutoff, ${f(x.cutoffPerCellV, 2)} V per cell)`;
  const widened =
    tol > STANDARD_CURRENT_TOLERANCE
      ? [
          `The current tolerance was widened to ${pct(tol)}; the standard's is ${pct(STANDARD_CURRENT_TOLERANCE)}.`,
        ]
      : [];
  const off = deviations(x, m, tol);
  const result =
    off.length > 0
      ? {
          outcome: 'method_not_followed' as const,
          summary: `No verdict: the run did not follow the method of ${m.standard}.`,
        }
      : outcomeOf(x, hours);
  const basis = `current held at 0.2 It = ${f(methodCurrentA ?? 0, 3)} A within ${pct(tol)} (${f(x.minCurrentA, 3)} to ${f(x.maxCurrentA, 3)} A, mean ${f(x.averageCurrentA, 3)} A); ${f(x.startTemperatureC ?? NaN, 1)} °C at the start`;
  return {
    standard: m.standard,
    label: `a check against the method of ${m.standard}, not a certification`,
    method: `discharge at a constant 0.2 It (${pct(tol)}) to ${endText} at 20 ± 5 °C; the rating is met when the discharge lasts at least ${REQUIRED_HOURS} h`,
    clause: `${m.clause}; ${m.toleranceClause}`,
    ...result,
    reasons: off.length > 0 ? off : [basis],
    cautions: [
      `The method asks for the cell to have been ${m.charge}; the run folder cannot show that.`,
      ...widened,
    ],
    methodCurrentA,
    requiredHours: REQUIRED_HOURS,
    hours,
  };
}
