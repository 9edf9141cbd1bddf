/**
 * Standard uncertainty of a run's capacity and energy by the law of propagation of the GUM
 * (JCGM 100:2008, 5.1.2), expanded with k = 2. Calibration terms are common to every sample,
 * so they add linearly over the run (5.2, r = 1); per-sample noise and quantisation are
 * independent from sample to sample and average down with √N (4.2.3).
 */
import type { Calibration, QuantityCalibration } from '../calibration/calibration.js';
import { rectangularU } from '../calibration/reference-accuracy.js';
import type { SwitchWindows } from '../session/integrator.js';

export interface UncertaintyInput {
  chargeAh: number;
  energyWh: number;
  /** Integral of the uncorrected (nominal) current while the load was on. */
  nominalAh: number;
  /** Load-on time, s. */
  onS: number;
  /** Frames that contributed to the integral. */
  samples: number;
  /** Amps and volts of one ADC count. */
  ampsPerCount: number;
  voltsPerCount: number;
  meanVoltageV: number;
  /** Charge interpolated across long gaps. */
  bridgedAh: number;
  calibration: Calibration | null;
  /** Standard deviation of one loaded current reading about its neighbours, from the run (Type A). */
  currentNoiseA?: number;
  /** The same for the loaded voltage. */
  voltageNoiseV?: number;
  /**
   * Samples whose rounding errors are independent: all of them when the noise dithers the
   * ADC, only the distinct codes visited when it does not. @default samples
   */
  quantisationSamples?: { current?: number; voltage?: number };
  /** The load's switches as the integral placed them. */
  loadSwitches?: SwitchWindows;
}

export interface UncertaintyTerm {
  name: string;
  /** Standard uncertainty contributed to the figure, in its unit. */
  u: number;
  /** JCGM 100:2008: A from the statistics of the data (4.2), B from other knowledge (4.3). */
  type: 'A' | 'B';
  /** The distribution, divisor or statistic behind `u`. */
  basis: string;
  /** `correlated`: common to every sample, adds linearly over the run; `averaged`: independent per sample. */
  over_run: 'correlated' | 'averaged';
}

export interface FigureUncertainty {
  standard: number;
  expanded: number;
  k: 2;
  basis: string;
  terms: UncertaintyTerm[];
}

/** Assumed errors of a board nobody calibrated: the scale the product exists to remove. */
export const UNCALIBRATED_GAIN_HALF_WIDTH = 0.05;
export const UNCALIBRATED_CURRENT_OFFSET_HALF_WIDTH_A = 0.05;
export const UNCALIBRATED_VOLTAGE_GAIN_HALF_WIDTH = 0.02;
/** A host's crystal-based monotonic clock, rectangular half-width (common practice). */
export const HOST_CLOCK_HALF_WIDTH = 100e-6;

/** Standard uncertainty of the mean of `n` independent readings of standard deviation `sd` (JCGM 100:2008 4.2.3). */
export function meanU(sd: number, n: number): number {
  return sd / Math.sqrt(Math.max(1, n));
}

/**
 * Combined standard uncertainty from contributions c_i·u(x_i) and their correlation
 * coefficients r(x_i, x_j) (JCGM 100:2008 5.2.2, eq. 16). Independent inputs by default.
 */
export function combineContributions(
  contributions: readonly number[],
  r: (i: number, j: number) => number = (i, j) => (i === j ? 1 : 0),
): number {
  let v = 0;
  for (let i = 0; i < contributions.length; i++) {
    for (let j = 0; j < contributions.length; j++)
      v += contributions[i]! * contributions[j]! * r(i, j);
  }
  return Math.sqrt(Math.max(0, v));
}

/**
 * The part of the reference meter's stated uncertainty common to every calibration point: its
 * scale error does not average out across the points the way the fit assumes. The smallest
 * stated relative uncertainty among the points is taken as that common part.
 */
export function referenceScaleRelU(q: QuantityCalibration): number | null {
  const rel = q.points
    .filter((p) => p.reference !== 0)
    .map((p) => p.reference_u / Math.abs(p.reference));
  return rel.length > 0 ? Math.min(...rel) : null;
}

function fitU(q: QuantityCalibration, nominal: number, time: number): number {
  const f = q.fit;
  return Math.sqrt(
    Math.max(
      0,
      (nominal * f.u_gain) ** 2 + (time * f.u_offset) ** 2 + 2 * nominal * time * f.cov_gain_offset,
    ),
  );
}

function combine(terms: UncertaintyTerm[], basis: string): FigureUncertainty {
  // Terms are independent of one another; each one's own correlation over the run is inside its u.
  const standard = combineContributions(terms.map((t) => t.u));
  return { standard, expanded: 2 * standard, k: 2, basis, terms };
}

const pct = (x: number): string => `${Number((x * 100).toPrecision(3))} %`;

/** The charge's calibration (or uncalibrated gain and offset) terms into `qt`; returns the basis. */
function chargeCalibrationTerms(
  x: UncertaintyInput,
  q: number,
  hours: number,
  qt: UncertaintyTerm[],
): string {
  const cal = x.calibration;
  if (cal?.current) {
    const f = cal.current.fit;
    qt.push({
      name: 'current calibration fit (gain and offset, correlated over the run)',
      u: fitU(cal.current, x.nominalAh, hours),
      type: 'A',
      basis: `gain ${f.gain.toPrecision(6)} ± ${f.u_gain.toPrecision(2)}, offset ${f.offset.toPrecision(3)} ± ${f.u_offset.toPrecision(2)} A with their covariance; sensitivities: nominal charge and load-on time`,
      over_run: 'correlated',
    });
    const rel = referenceScaleRelU(cal.current);
    if (rel !== null) {
      qt.push({
        name: 'reference meter scale, current (common to the calibration points)',
        u: q * rel,
        type: 'B',
        basis: `${pct(rel)} of the reading (smallest stated relative uncertainty of the points)`,
        over_run: 'correlated',
      });
    }
    return `calibration ${cal.id}`;
  } else {
    qt.push({
      name: 'uncalibrated current gain (rectangular ±5 %)',
      u: q * rectangularU(UNCALIBRATED_GAIN_HALF_WIDTH),
      type: 'B',
      basis: 'rectangular, half-width 5 % of the charge: a/√3',
      over_run: 'correlated',
    });
    qt.push({
      name: 'uncalibrated current offset (rectangular ±50 mA)',
      u: hours * rectangularU(UNCALIBRATED_CURRENT_OFFSET_HALF_WIDTH_A),
      type: 'B',
      basis: 'rectangular, half-width 50 mA over the load-on time: a/√3',
      over_run: 'correlated',
    });
    return 'no calibration: assumed rectangular errors of ±5 % gain and ±50 mA offset';
  }
}

/** The charge's noise, quantisation, time base and bridged-gap terms into `qt`. */
function chargeReadingTerms(
  x: UncertaintyInput,
  q: number,
  hours: number,
  n: number,
  qt: UncertaintyTerm[],
): void {
  if (x.currentNoiseA !== undefined) {
    qt.push({
      name: 'current noise (averaged over the samples)',
      u: hours * meanU(x.currentNoiseA, n),
      type: 'A',
      basis: `s = ${x.currentNoiseA.toPrecision(2)} A per reading, ÷ √${n}`,
      over_run: 'averaged',
    });
  }
  const nqI = Math.max(1, x.quantisationSamples?.current ?? n);
  qt.push({
    name: 'current quantisation (averaged over the samples)',
    u: hours * meanU(rectangularU(x.ampsPerCount / 2), nqI),
    type: 'B',
    basis: `rectangular ±½ count (${(x.ampsPerCount * 1000).toPrecision(3)} mA a count): a/√3, ÷ √${nqI}`,
    over_run: 'averaged',
  });
  qt.push({
    name: 'host time base (rectangular ±100 ppm)',
    u: q * rectangularU(HOST_CLOCK_HALF_WIDTH),
    type: 'B',
    basis: 'rectangular ±100 ppm of the load-on time: a/√3',
    over_run: 'correlated',
  });
  const sw = x.loadSwitches;
  if (sw && sw.count > 0) qt.push(switchingTerm(sw));
  if (x.bridgedAh > 0) {
    qt.push({
      name: 'charge bridged across long gaps (rectangular, half of it)',
      u: rectangularU(x.bridgedAh / 2),
      type: 'B',
      basis: 'rectangular, half-width half the interpolated charge: a/√3',
      over_run: 'correlated',
    });
  }
}

/**
 * When the load switched: the host places each switch only within its window, so the charge
 * near it is known to within a rectangular half-width a = current × (that part of the window);
 * u = a/√3 for each (JCGM 100:2008 4.3.7), switches independent of one another, in quadrature.
 */
export function switchingTerm(sw: SwitchWindows): UncertaintyTerm {
  const n = sw.count;
  return {
    name: 'load switching instants (rectangular, each switch)',
    u: Math.sqrt(sw.sumSqHalfWidthAh) / Math.sqrt(3),
    type: 'B',
    basis: `${n} switch${n === 1 ? '' : 'es'} of the load, each placed within the frames (or the rig's acknowledgement) bracketing it, widest ${Number(sw.widestMs.toPrecision(4))} ms: half-width a = current at the switch × the time the integral may be wrong by, a/√3 each, independent switches in quadrature`,
    over_run: 'averaged',
  };
}

/** The voltage channel's own terms of the energy into `et`. */
function voltageTerms(x: UncertaintyInput, q: number, n: number, et: UncertaintyTerm[]): void {
  const cal = x.calibration;
  if (cal?.voltage) {
    const f = cal.voltage.fit;
    const vNominal = f.gain !== 0 ? (x.meanVoltageV - f.offset) / f.gain : x.meanVoltageV;
    et.push({
      name: 'voltage calibration fit (correlated over the run)',
      u: q * fitU(cal.voltage, vNominal, 1),
      type: 'A',
      basis: `gain ± ${f.u_gain.toPrecision(2)}, offset ± ${f.u_offset.toPrecision(2)} V at the mean voltage, times the charge`,
      over_run: 'correlated',
    });
    const rel = referenceScaleRelU(cal.voltage);
    if (rel !== null) {
      et.push({
        name: 'reference meter scale, voltage (common to the calibration points)',
        u: Math.abs(x.energyWh) * rel,
        type: 'B',
        basis: `${pct(rel)} of the reading (smallest stated relative uncertainty of the points)`,
        over_run: 'correlated',
      });
    }
  } else {
    et.push({
      name: 'uncalibrated voltage gain (rectangular ±2 %)',
      u: Math.abs(x.energyWh) * rectangularU(UNCALIBRATED_VOLTAGE_GAIN_HALF_WIDTH),
      type: 'B',
      basis: 'rectangular, half-width 2 % of the energy: a/√3',
      over_run: 'correlated',
    });
  }
  if (x.voltageNoiseV !== undefined) {
    et.push({
      name: 'voltage noise (averaged over the samples)',
      u: q * meanU(x.voltageNoiseV, n),
      type: 'A',
      basis: `s = ${x.voltageNoiseV.toPrecision(2)} V per reading, ÷ √${n}, times the charge`,
      over_run: 'averaged',
    });
  }
  const nqV = Math.max(1, x.quantisationSamples?.voltage ?? n);
  et.push({
    name: 'voltage quantisation (averaged over the samples)',
    u: q * meanU(rectangularU(x.voltsPerCount / 2), nqV),
    type: 'B',
    basis: `rectangular ±½ count (${(x.voltsPerCount * 1000).toPrecision(3)} mV a count): a/√3, ÷ √${nqV}, times the charge`,
    over_run: 'averaged',
  });
}

export function runUncertainty(x: UncertaintyInput): {
  capacity_Ah: FigureUncertainty;
  energy_Wh: FigureUncertainty;
} {
  const hours = x.onS / 3600;
  const q = Math.abs(x.chargeAh);
  const n = Math.max(1, x.samples);
  const qt: UncertaintyTerm[] = [];
  const basis = chargeCalibrationTerms(x, q, hours, qt);
  chargeReadingTerms(x, q, hours, n, qt);
  const capacity = combine(qt, basis);

  // Energy: the charge terms scale by the mean voltage; the voltage channel adds its own.
  const et: UncertaintyTerm[] = qt.map((t) => ({ ...t, u: t.u * x.meanVoltageV }));
  voltageTerms(x, q, n, et);
  const energy = combine(et, basis);
  return { capacity_Ah: capacity, energy_Wh: energy };
}
