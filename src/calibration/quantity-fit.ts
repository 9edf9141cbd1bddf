/**
 * Fitting the captured points of each quantity into a calibration, with the checks that make a
 * fit trustworthy: refused when the points cannot determine the line, warned about when they
 * determine it poorly or one of them does not fit.
 */
import { ErrorCodes, makeError } from '../core/errors.js';
import {
  UNITS,
  CALIBRATION_FORMAT,
  fitQuantity,
  type CalibrationContent,
  type CalibrationPoint,
  type Quantity,
  type QuantityCalibration,
  type QuantityFit,
} from './calibration.js';
import { gainProblem } from './plausible.js';

export const QUANTITIES: readonly Quantity[] = ['voltage', 'current', 'temperature'];

/** Voltage and current get a gain and an offset; the thermistor an offset only (gain 1). */
export function modelFor(quantity: Quantity): QuantityFit['model'] {
  return quantity === 'temperature' ? 'offset' : 'gain_offset';
}

export function minPoints(quantity: Quantity): number {
  return modelFor(quantity) === 'offset' ? 1 : 2;
}

/** Warn outside this band: a real board is seldom more than a few percent off its profile. */
const GAIN_WARN = { low: 0.8, high: 1.25 };
/** Warn when the gain is known to worse than this (relative standard uncertainty). */
const GAIN_U_WARN = 0.01;
/** Two readings closer than this many of their standard uncertainties cannot be told apart. */
const SEPARATION = 3;

export interface QuantityOutcome {
  quantity: Quantity;
  calibration: QuantityCalibration;
  /** Standardized residual per point (NaN where it cannot be judged). */
  standardized: number[];
  /** 0-based indices of points that do not fit the line. */
  outliers: number[];
  warnings: string[];
}

function combinedU(p: CalibrationPoint): number {
  return Math.hypot(p.reference_u, p.nominal_u ?? 0);
}

function span(values: readonly number[]): number {
  return Math.max(...values) - Math.min(...values);
}

function fmt(x: number): string {
  return Number(x.toPrecision(4)).toString();
}

/** Refuses points whose reference readings, or the rig's readings, do not spread enough to give a gain. */
function checkSpread(quantity: Quantity, points: readonly CalibrationPoint[], where: string): void {
  const unit = UNITS[quantity];
  const n = points.length;
  const uMax = Math.max(...points.map(combinedU));
  const refSpan = span(points.map((p) => p.reference));
  if (!(refSpan > SEPARATION * uMax) || refSpan === 0) {
    throw makeError(
      ErrorCodes.CALIBRATION_FIT,
      `the ${n} ${quantity} points have ${refSpan === 0 ? 'the same' : 'nearly the same'} reference reading ` +
        `(spread ${fmt(refSpan)} ${unit} against an uncertainty of ${fmt(uMax)} ${unit}), so no gain can be found`,
      where,
      `Take points at clearly different ${quantity}s: ${quantity === 'current' ? 'the load off (0 A) and the load on' : 'e.g. a cell near empty and near full, or a bench supply at two settings'}; check that each reading was typed for its own point.`,
    );
  }
  const nomSpan = span(points.map((p) => p.nominal));
  const uNomMax = Math.max(...points.map((p) => p.nominal_u ?? 0));
  if (!(nomSpan > SEPARATION * uNomMax) || nomSpan === 0) {
    throw makeError(
      ErrorCodes.CALIBRATION_FIT,
      `the rig read the same ${quantity} at all ${n} points (spread ${fmt(nomSpan)} ${unit}), so no gain can be found`,
      where,
      `Check that the condition really changed between points (the load switched, the supply set) and that the ${quantity} channel is wired.`,
    );
  }
}

/** Fits one quantity, refusing degenerate points with a message that says what to take instead. */
export function fitCheckedQuantity(
  quantity: Quantity,
  points: readonly CalibrationPoint[],
): QuantityOutcome {
  const where = `calibrate: ${quantity}`;
  const unit = UNITS[quantity];
  const model = modelFor(quantity);
  const n = points.length;
  if (n < minPoints(quantity)) {
    throw makeError(
      ErrorCodes.CALIBRATION_FIT,
      `a ${quantity} calibration needs at least ${minPoints(quantity)} points, got ${n}`,
      where,
      quantity === 'current'
        ? 'Take one point with the load off (0 A) and one or more with the load on, each read on the reference meter.'
        : `Take points at clearly different ${quantity}s over the range used; three or more are recommended.`,
    );
  }
  const warnings: string[] = [];
  if (model === 'gain_offset') checkSpread(quantity, points, where);
  const r = fitQuantity(quantity, points, model, where);
  const fit = r.calibration.fit;
  if (model === 'gain_offset') {
    const gainRefused = gainProblem(quantity, fit.gain);
    if (gainRefused !== null) {
      throw makeError(
        ErrorCodes.CALIBRATION_FIT,
        `the fitted ${gainRefused}`,
        where,
        `Check that the readings are in ${unit} (not m${unit}) and typed for the right points, and that the rig profile (--rig) describes this board.`,
      );
    }
    if (fit.gain < GAIN_WARN.low || fit.gain > GAIN_WARN.high) {
      warnings.push(
        `the ${quantity} gain ${fmt(fit.gain)} is far from 1: check that the rig profile describes this board`,
      );
    }
    if (fit.u_gain / fit.gain > GAIN_U_WARN) {
      warnings.push(
        `the ${quantity} gain is known only to ±${fmt((100 * fit.u_gain) / fit.gain)} % (standard uncertainty): take points further apart or a more accurate reference`,
      );
    }
    if (n === 2) {
      warnings.push(
        `only two ${quantity} points: the line passes through both, so a wrong reading cannot show; three or more are recommended`,
      );
    }
  }
  for (const k of r.outliers) {
    warnings.push(
      `${quantity} point ${k + 1} does not fit the line (standardized residual ${fmt(r.standardized[k]!)}): retake it, or check the reading typed for it`,
    );
  }
  return {
    quantity,
    calibration: r.calibration,
    standardized: r.standardized,
    outliers: r.outliers,
    warnings,
  };
}

export interface CalibrationMeta {
  rig: string;
  date: string;
  referenceInstrument: string;
}

/** The calibration file's content from the points of each quantity (quantities without points are left out). */
export function buildCalibration(
  meta: CalibrationMeta,
  points: Partial<Record<Quantity, readonly CalibrationPoint[]>>,
): { content: CalibrationContent; outcomes: QuantityOutcome[] } {
  const outcomes: QuantityOutcome[] = [];
  const content: CalibrationContent = {
    format: CALIBRATION_FORMAT,
    rig: meta.rig,
    date: meta.date,
    reference_instrument: meta.referenceInstrument,
  };
  for (const q of QUANTITIES) {
    const pts = points[q];
    if (!pts || pts.length === 0) continue;
    const o = fitCheckedQuantity(q, pts);
    outcomes.push(o);
    content[q] = o.calibration;
  }
  if (outcomes.length === 0) {
    throw makeError(
      ErrorCodes.CALIBRATION_FIT,
      'no points were taken',
      'calibrate',
      'Take at least the current points (load off and load on) against a reference meter.',
    );
  }
  return { content, outcomes };
}
