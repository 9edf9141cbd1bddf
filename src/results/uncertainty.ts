/**
 * Standard uncertainty of a run's capacity and energy by the law of propagation of the GUM
 * (JCGM 100:2008, 5.1.2), expanded with k = 2. Calibration terms are common to every sample,
 * so they add linearly over the run; per-sample quantisation averages down with √N.
 */
import type { Calibration } from '../calibration/calibration.js';

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
}

export interface UncertaintyTerm {
  name: string;
  /** Standard uncertainty contributed to the figure, in its unit. */
  u: number;
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

const SQRT3 = Math.sqrt(3);

function combine(terms: UncertaintyTerm[], basis: string): FigureUncertainty {
  const standard = Math.sqrt(terms.reduce((s, t) => s + t.u * t.u, 0));
  return { standard, expanded: 2 * standard, k: 2, basis, terms };
}

export function runUncertainty(x: UncertaintyInput): { capacity_Ah: FigureUncertainty; energy_Wh: FigureUncertainty } {
  const hours = x.onS / 3600;
  const cal = x.calibration;
  const q: UncertaintyTerm[] = [];
  let basis: string;
  if (cal?.current) {
    const f = cal.current.fit;
    // Q = gain·Q_nominal + offset·t: sensitivities Q_nominal and t, with the fit's covariance.
    const v = (x.nominalAh * f.u_gain) ** 2 + (hours * f.u_offset) ** 2 + 2 * x.nominalAh * hours * f.cov_gain_offset;
    q.push({ name: 'current calibration (gain and offset, correlated over the run)', u: Math.sqrt(Math.max(0, v)) });
    basis = `calibration ${cal.id}`;
  } else {
    q.push({ name: 'uncalibrated current gain (rectangular ±5 %)', u: (Math.abs(x.chargeAh) * UNCALIBRATED_GAIN_HALF_WIDTH) / SQRT3 });
    q.push({ name: 'uncalibrated current offset (rectangular ±50 mA)', u: (hours * UNCALIBRATED_CURRENT_OFFSET_HALF_WIDTH_A) / SQRT3 });
    basis = 'no calibration: assumed rectangular errors of ±5 % gain and ±50 mA offset';
  }
  const n = Math.max(1, x.samples);
  q.push({ name: 'current quantisation (averaged over the samples)', u: (hours * x.ampsPerCount) / (2 * SQRT3) / Math.sqrt(n) });
  q.push({ name: 'host time base (rectangular ±100 ppm)', u: (Math.abs(x.chargeAh) * HOST_CLOCK_HALF_WIDTH) / SQRT3 });
  if (x.bridgedAh > 0) q.push({ name: 'charge bridged across long gaps (rectangular, half of it)', u: x.bridgedAh / 2 / SQRT3 });
  const capacity = combine(q, basis);

  // Energy: the charge terms scale by the mean voltage; the voltage channel adds its own.
  const e: UncertaintyTerm[] = q.map((t) => ({ name: t.name, u: t.u * x.meanVoltageV }));
  if (cal?.voltage) {
    const f = cal.voltage.fit;
    const vNominal = f.gain !== 0 ? (x.meanVoltageV - f.offset) / f.gain : x.meanVoltageV;
    const uV = Math.sqrt(Math.max(0, (vNominal * f.u_gain) ** 2 + f.u_offset ** 2 + 2 * vNominal * f.cov_gain_offset));
    e.push({ name: 'voltage calibration (correlated over the run)', u: Math.abs(x.chargeAh) * uV });
  } else {
    e.push({ name: 'uncalibrated voltage gain (rectangular ±2 %)', u: (Math.abs(x.energyWh) * UNCALIBRATED_VOLTAGE_GAIN_HALF_WIDTH) / SQRT3 });
  }
  e.push({ name: 'voltage quantisation (averaged over the samples)', u: (Math.abs(x.chargeAh) * x.voltsPerCount) / (2 * SQRT3) / Math.sqrt(n) });
  const energy = combine(e, basis);
  return { capacity_Ah: capacity, energy_Wh: energy };
}
