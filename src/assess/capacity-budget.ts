/**
 * The expected uncertainty of a stated capacity test (a current for some hours) by the GUM
 * (JCGM 100:2008): each term a standard uncertainty of the charge, combined by the law of
 * propagation (5.1.2) as independent terms, expanded with k = 2. Calibration and time-base
 * errors are common to every sample of a run, so they scale with the whole charge and do not
 * average down.
 *
 * Which terms apply depends on what is known:
 * - a calibration file: its fit's standard uncertainties and covariance at the test current
 *   (they already carry the reference meter's stated uncertainty);
 * - a reference meter's accuracy only (a calibration still to be taken): that meter at the test
 *   current, plus the mean counts of the calibration points, each known to ±½ count;
 * - neither: the profile's predicted offset and connection-resistance gain error (or the
 *   assumed errors of an uncalibrated board), as rectangular half-widths.
 */
import type { Calibration } from '../calibration/calibration.js';
import { parseAccuracy, rectangularU } from '../calibration/reference-accuracy.js';
import {
  HOST_CLOCK_HALF_WIDTH,
  UNCALIBRATED_CURRENT_OFFSET_HALF_WIDTH_A,
  UNCALIBRATED_GAIN_HALF_WIDTH,
} from '../results/uncertainty.js';
import type { FrontEndErrors } from './front-end-errors.js';

export interface BudgetInput {
  currentA: number;
  hours: number;
  ampsPerCount: number;
  calibration: Calibration | null;
  /** The reference meter's accuracy at the test current, e.g. "0.5%+0.003" or "u=0.002". */
  referenceAccuracy?: string;
  frontEnd: FrontEndErrors;
  /** Tolerance of the rig's own oscillator (fraction), to show what using its clock would cost. */
  rigClockTolerance?: number;
}

export interface BudgetTerm {
  term: string;
  basis: string;
  /** Standard uncertainty of the capacity, Ah. */
  u_Ah: number;
}

export type BudgetMode = 'calibration_file' | 'reference_meter' | 'uncalibrated';

export interface CapacityBudget {
  current_A: number;
  hours: number;
  capacity_Ah: number;
  mode: BudgetMode;
  terms: BudgetTerm[];
  combined_u_Ah: number;
  k: 2;
  expanded_U_Ah: number;
  /** expanded_U_Ah / capacity_Ah. */
  expanded_relative: number;
  /** What timing by the rig's own oscillator would add instead of the host clock (not in the total). */
  rig_clock?: { tolerance: number; half_width_Ah: number; u_Ah: number };
}

const SQRT12 = Math.sqrt(12);

/** Without a calibration: the front end's offset and gain errors, or assumed ones. */
function uncalibratedTerms(x: BudgetInput, q: number): BudgetTerm[] {
  const out: BudgetTerm[] = [];
  const offset = x.frontEnd.offset_A;
  out.push(
    offset !== undefined
      ? {
          term: 'current offset (uncalibrated)',
          basis: `op-amp input offset / shunt = ±${fmt(Math.abs(offset) * 1000)} mA, rectangular`,
          u_Ah: rectangularU(offset) * x.hours,
        }
      : {
          term: 'current offset (uncalibrated)',
          basis: `not in the rig profile; assumed ±${UNCALIBRATED_CURRENT_OFFSET_HALF_WIDTH_A * 1000} mA, rectangular`,
          u_Ah: rectangularU(UNCALIBRATED_CURRENT_OFFSET_HALF_WIDTH_A) * x.hours,
        },
  );
  const gain = x.frontEnd.connection_gain_error;
  out.push(
    gain !== undefined
      ? {
          term: 'current gain (uncalibrated)',
          basis: `connection / shunt resistance = ±${fmt(gain * 100)} %, rectangular`,
          u_Ah: rectangularU(gain) * q,
        }
      : {
          term: 'current gain (uncalibrated)',
          basis: `not in the rig profile; assumed ±${UNCALIBRATED_GAIN_HALF_WIDTH * 100} %, rectangular`,
          u_Ah: rectangularU(UNCALIBRATED_GAIN_HALF_WIDTH) * q,
        },
  );
  return out;
}

export function capacityBudget(x: BudgetInput): CapacityBudget {
  const q = x.currentA * x.hours;
  const terms: BudgetTerm[] = [];
  let mode: BudgetMode;
  const cal = x.calibration?.current;
  if (cal) {
    mode = 'calibration_file';
    const f = cal.fit;
    // The run reads nominal x at the test current; corrected = gain·x + offset.
    const nominal = (x.currentA - f.offset) / f.gain;
    const uI = Math.sqrt(
      Math.max(0, (nominal * f.u_gain) ** 2 + f.u_offset ** 2 + 2 * nominal * f.cov_gain_offset),
    );
    terms.push({
      term: 'calibration (reference meter and fit)',
      basis: `fit of calibration ${x.calibration!.id} at ${x.currentA} A: u(I) = ${fmt(uI * 1000)} mA, for the whole run`,
      u_Ah: uI * x.hours,
    });
  } else if (x.referenceAccuracy !== undefined) {
    mode = 'reference_meter';
    const r = parseAccuracy(x.referenceAccuracy, x.currentA, '--reference-accuracy', 'A');
    terms.push({
      term: 'reference meter',
      basis: `${r.basis} at ${x.currentA} A, for the whole run`,
      u_Ah: r.u * x.hours,
    });
    terms.push({
      term: 'fit (mean counts of the calibration points)',
      basis: 'a point near the test current, its mean count known to ±½ count: u = 1 count/√12',
      u_Ah: (x.ampsPerCount / SQRT12) * x.hours,
    });
  } else {
    mode = 'uncalibrated';
    terms.push(...uncalibratedTerms(x, q));
  }
  terms.push({
    term: 'quantisation',
    basis: `±½ count = ±${fmt((x.ampsPerCount / 2) * 1000)} mA, rectangular, not averaged down (a steady current can sit on one count)`,
    u_Ah: (x.ampsPerCount / 2 / Math.sqrt(3)) * x.hours,
  });
  terms.push({
    term: 'time base',
    basis: `host clock, ±${HOST_CLOCK_HALF_WIDTH * 1e6} ppm, rectangular (frames are timed by the host, not the rig)`,
    u_Ah: rectangularU(HOST_CLOCK_HALF_WIDTH) * q,
  });
  const combined = Math.sqrt(terms.reduce((s, t) => s + t.u_Ah * t.u_Ah, 0));
  const out: CapacityBudget = {
    current_A: x.currentA,
    hours: x.hours,
    capacity_Ah: q,
    mode,
    terms,
    combined_u_Ah: combined,
    k: 2,
    expanded_U_Ah: 2 * combined,
    expanded_relative: (2 * combined) / q,
  };
  if (x.rigClockTolerance !== undefined) {
    // Charge = current × time: a clock fast or slow by a fraction scales the charge by the same fraction.
    const half = x.rigClockTolerance * q;
    out.rig_clock = {
      tolerance: x.rigClockTolerance,
      half_width_Ah: half,
      u_Ah: rectangularU(half),
    };
  }
  return out;
}

function fmt(x: number): string {
  return Number(x.toPrecision(3)).toString();
}
