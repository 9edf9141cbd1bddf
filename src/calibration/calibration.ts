/**
 * A calibration (docs/calibration.md): reference points and straight-line fits that correct
 * the analog chain's nominal values, identified by a content id that every logged sample
 * carries. Reading and writing the file is in calibration-file.ts.
 */
import { createHash } from 'node:crypto';
import { fitLine, fitOffset, type FitOptions, type LinearFit } from './fit.js';

export const CALIBRATION_FORMAT = 1;

export type Quantity = 'voltage' | 'current' | 'temperature';

export const UNITS: Record<Quantity, string> = { voltage: 'V', current: 'A', temperature: '°C' };

export interface CalibrationPoint {
  /** Mean raw ADC count over the averaging window. */
  raw_mean: number;
  /** Standard deviation of the raw counts in the window. */
  raw_sd?: number;
  /** Number of frames averaged. */
  samples?: number;
  /** The chain's nominal value for raw_mean (V, A or °C). */
  nominal: number;
  /**
   * Standard uncertainty of `nominal` from the averaging (standard error of the mean count,
   * with quantisation when the noise is too small to dither), in the same unit.
   */
  nominal_u?: number;
  /** The reference instrument's reading. */
  reference: number;
  /** Standard uncertainty of the reference reading (same unit). */
  reference_u: number;
}

export interface QuantityFit extends LinearFit {
  /** `offset`: gain held at 1 (e.g. a thermistor checked at one temperature). */
  model: 'gain_offset' | 'offset';
}

export interface QuantityCalibration {
  points: CalibrationPoint[];
  fit: QuantityFit;
}

/** Everything in a calibration file except its id. */
export interface CalibrationContent {
  format: typeof CALIBRATION_FORMAT;
  rig: string;
  /** ISO 8601 date and time of the calibration. */
  date: string;
  /** The reference instrument: make, model, range, and its own calibration if known. */
  reference_instrument: string;
  voltage?: QuantityCalibration;
  current?: QuantityCalibration;
  temperature?: QuantityCalibration;
}

export interface Calibration extends CalibrationContent {
  /** First 16 hex digits of the sha256 of the canonical JSON of everything else. */
  id: string;
}

/** Turns nominal values into corrected ones; pure and cheap, applied to every sample. */
export interface Corrector {
  /** The calibration id, or 'none' when uncalibrated. */
  readonly id: string;
  voltage(nominal: number): number;
  current(nominal: number): number;
  temperature(nominal: number): number;
}

/** JSON with object keys sorted at every level and no whitespace: the same content, the same text. */
export function canonicalJson(value: unknown): string {
  if (Array.isArray(value)) return `[${value.map(canonicalJson).join(',')}]`;
  if (value !== null && typeof value === 'object') {
    const entries = Object.entries(value as Record<string, unknown>)
      .filter(([, v]) => v !== undefined)
      .sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
    return `{${entries.map(([k, v]) => `${JSON.stringify(k)}:${canonicalJson(v)}`).join(',')}}`;
  }
  return JSON.stringify(value);
}

/** The content id of a calibration: ignores any `id` already present. */
export function calibrationId(cal: CalibrationContent | Calibration): string {
  const { id: _ignored, ...content } = cal as Calibration;
  return createHash('sha256').update(canonicalJson(content)).digest('hex').slice(0, 16);
}

/** Adds the content id. */
export function sealCalibration(content: CalibrationContent): Calibration {
  return { id: calibrationId(content), ...content };
}

/**
 * Fits one quantity's points: gain and offset, or offset only. The residual of each point is
 * recomputable from the stored fit, so it is not stored twice. A point's weight comes from the
 * reference's uncertainty combined with the nominal's (effective variance: the gain is close
 * to 1 by construction, so the nominal's u counts one for one).
 */
export function fitQuantity(
  quantity: Quantity,
  points: readonly CalibrationPoint[],
  model: QuantityFit['model'],
  where = `${quantity} calibration`,
): { calibration: QuantityCalibration; outliers: number[]; standardized: number[] } {
  const xy = points.map((p) => ({
    x: p.nominal,
    y: p.reference,
    u: Math.hypot(p.reference_u, p.nominal_u ?? 0),
  }));
  const options: FitOptions = { quantity, where };
  const r = model === 'gain_offset' ? fitLine(xy, options) : fitOffset(xy, options);
  const fit: QuantityFit = {
    model,
    gain: r.gain,
    offset: r.offset,
    u_gain: r.u_gain,
    u_offset: r.u_offset,
    cov_gain_offset: r.cov_gain_offset,
    residual_sd: r.residual_sd,
    dof: r.dof,
  };
  return {
    calibration: { points: points.map((p) => ({ ...p })), fit },
    outliers: r.outliers,
    standardized: r.standardized,
  };
}

const identity = (x: number): number => x;

function line(q: QuantityCalibration | undefined): (x: number) => number {
  if (!q) return identity;
  const { gain, offset } = q.fit;
  return (x) => gain * x + offset;
}

/** A corrector for `cal`; with null, values pass through unchanged and the id is 'none'. */
export function applyCalibration(cal: Calibration | null): Corrector {
  if (!cal) return { id: 'none', voltage: identity, current: identity, temperature: identity };
  return {
    id: cal.id,
    voltage: line(cal.voltage),
    current: line(cal.current),
    temperature: line(cal.temperature),
  };
}
