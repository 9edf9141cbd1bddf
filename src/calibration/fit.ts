/**
 * Straight-line least squares of reference readings (y) against the chain's nominal values (x),
 * with standard uncertainties, for the calibration file.
 *
 * - Weighted by 1/u² when every point states an uncertainty u > 0, else unweighted.
 * - Unweighted, more than two points: the covariance is scaled by the residual variance
 *   s² = Σr²/(n − 2), the textbook result.
 * - Weighted, more than two points: the covariance comes from the stated uncertainties,
 *   enlarged by χ²/(n − 2) when the scatter shows they were understated (never reduced).
 * - Exactly two points: the line passes through both, and u_gain, u_offset and their covariance
 *   are the points' stated uncertainties propagated through the two-point formulas (zero when
 *   none were stated). dof and residual_sd are 0.
 * - Sums are taken about the weighted mean of x, so large, close x values lose no digits.
 */
import { ErrorCodes, makeError } from '../core/errors.js';

export interface FitPoint {
  /** Nominal value from the analog chain. */
  x: number;
  /** Reference reading. */
  y: number;
  /** Standard uncertainty of y, when stated. */
  u?: number;
}

/** The numbers a calibration file keeps. */
export interface LinearFit {
  gain: number;
  offset: number;
  u_gain: number;
  u_offset: number;
  cov_gain_offset: number;
  /** sqrt(Σr² / dof) in the units of y; 0 when dof is 0. */
  residual_sd: number;
  dof: number;
}

export interface FitResult extends LinearFit {
  weighted: boolean;
  /** y − (gain·x + offset) per point. */
  residuals: number[];
  /**
   * Residual over its own standard deviation, the scatter estimated without that point
   * (NaN where it cannot be judged: too few points, or a point that alone fixes the line).
   */
  standardized: number[];
  /** Indices of points whose |standardized| exceeds the outlier threshold. */
  outliers: number[];
}

export interface FitOptions {
  /** |standardized residual| above which a point is flagged. @default 3 */
  outlierThreshold?: number;
  /** The quantity, for messages: "current", "voltage", "temperature". @default "quantity" */
  quantity?: string;
  /** Where the points came from, for messages. @default "calibration fit" */
  where?: string;
}

/**
 * Two points: the line passes through both, so the uncertainties come from the points' own
 * (propagated through the two-point formulas), with no degrees of freedom left for scatter.
 */
function twoPointFit(
  [a, b]: readonly [FitPoint, FitPoint],
  gain: number,
  offset: number,
  weighted: boolean,
  residuals: number[],
): FitResult {
  const d = b.x - a.x;
  const ua2 = (a.u ?? 0) ** 2;
  const ub2 = (b.u ?? 0) ** 2;
  return {
    gain,
    offset,
    u_gain: Math.sqrt(ua2 + ub2) / Math.abs(d),
    u_offset: Math.sqrt(b.x * b.x * ua2 + a.x * a.x * ub2) / Math.abs(d),
    cov_gain_offset: -(b.x * ua2 + a.x * ub2) / (d * d),
    residual_sd: 0,
    dof: 0,
    weighted,
    residuals,
    standardized: [Number.NaN, Number.NaN],
    outliers: [],
  };
}

/** Fits reference = gain × nominal + offset. */
export function fitLine(points: readonly FitPoint[], options: FitOptions = {}): FitResult {
  const quantity = options.quantity ?? 'quantity';
  const where = options.where ?? 'calibration fit';
  checkFinite(points, where);
  const n = points.length;
  if (n < 2) {
    throw makeError(
      ErrorCodes.CALIBRATION_FIT,
      `a gain and an offset need at least 2 reference points, got ${n}`,
      where,
      `Take a second point at a clearly different ${quantity}.`,
    );
  }
  const weighted = points.every((p) => p.u !== undefined && p.u > 0);
  const w = points.map((p) => (weighted ? 1 / (p.u! * p.u!) : 1));

  let sw = 0;
  let swx = 0;
  let swy = 0;
  for (let i = 0; i < n; i++) {
    const p = points[i]!;
    sw += w[i]!;
    swx += w[i]! * p.x;
    swy += w[i]! * p.y;
  }
  const xm = swx / sw;
  const ym = swy / sw;
  let sxx = 0;
  let sxy = 0;
  let xMin = Infinity;
  let xMax = -Infinity;
  for (let i = 0; i < n; i++) {
    const p = points[i]!;
    const dx = p.x - xm;
    sxx += w[i]! * dx * dx;
    sxy += w[i]! * dx * (p.y - ym);
    xMin = Math.min(xMin, p.x);
    xMax = Math.max(xMax, p.x);
  }
  if (!(xMax - xMin > 1e-12 * Math.max(Math.abs(xMin), Math.abs(xMax))) || sxx === 0) {
    throw makeError(
      ErrorCodes.CALIBRATION_FIT,
      `all ${n} points have the same nominal ${quantity} (${xMin}), so no gain can be found`,
      where,
      `Take a second point at a clearly different ${quantity}, ideally near the top of the range used.`,
    );
  }
  const gain = sxy / sxx;
  const offset = ym - gain * xm;
  const residuals = points.map((p) => p.y - (gain * p.x + offset));

  if (n === 2)
    return twoPointFit(points as readonly [FitPoint, FitPoint], gain, offset, weighted, residuals);

  const dof = n - 2;
  const { ss, chi2, scale } = scatter(residuals, w, dof, weighted);
  const leverage = points.map((p, i) => w[i]! * (1 / sw + (p.x - xm) ** 2 / sxx));
  const standardized = studentize(residuals, w, leverage, chi2, dof, weighted);
  return {
    gain,
    offset,
    u_gain: Math.sqrt(scale / sxx),
    u_offset: Math.sqrt(scale * (1 / sw + (xm * xm) / sxx)),
    cov_gain_offset: (-scale * xm) / sxx,
    residual_sd: Math.sqrt(ss / dof),
    dof,
    weighted,
    residuals,
    standardized,
    outliers: flag(standardized, options.outlierThreshold ?? 3),
  };
}

/**
 * Sums of squared residuals, plain and weighted, and the factor the parameter variances take:
 * χ²/dof, never below 1 when stated uncertainties weight the points (too small a scatter does
 * not shrink them).
 */
function scatter(
  residuals: readonly number[],
  w: readonly number[],
  dof: number,
  weighted: boolean,
): { ss: number; chi2: number; scale: number } {
  let ss = 0;
  let chi2 = 0;
  for (let i = 0; i < residuals.length; i++) {
    const r = residuals[i]!;
    ss += r * r;
    chi2 += w[i]! * r * r;
  }
  return { ss, chi2, scale: weighted ? Math.max(1, chi2 / dof) : chi2 / dof };
}

/**
 * Fits reference = nominal + offset (gain fixed at 1): for channels where only a constant shift
 * is credible, such as a thermistor checked at one or a few temperatures. One point is enough;
 * it then gives the offset exactly, with the point's stated uncertainty.
 */
export function fitOffset(points: readonly FitPoint[], options: FitOptions = {}): FitResult {
  const quantity = options.quantity ?? 'quantity';
  const where = options.where ?? 'calibration fit';
  checkFinite(points, where);
  const n = points.length;
  if (n < 1) {
    throw makeError(
      ErrorCodes.CALIBRATION_FIT,
      'an offset needs at least 1 reference point, got 0',
      where,
      `Take a reference reading of the ${quantity}.`,
    );
  }
  const weighted = points.every((p) => p.u !== undefined && p.u > 0);
  const w = points.map((p) => (weighted ? 1 / (p.u! * p.u!) : 1));
  let sw = 0;
  let swd = 0;
  for (let i = 0; i < n; i++) {
    const p = points[i]!;
    sw += w[i]!;
    swd += w[i]! * (p.y - p.x);
  }
  const offset = swd / sw;
  const residuals = points.map((p) => p.y - p.x - offset);
  const base = { gain: 1, offset, u_gain: 0, cov_gain_offset: 0, weighted, residuals };
  if (n === 1) {
    return {
      ...base,
      u_offset: points[0]!.u ?? 0,
      residual_sd: 0,
      dof: 0,
      standardized: [Number.NaN],
      outliers: [],
    };
  }
  const dof = n - 1;
  const { ss, chi2, scale } = scatter(residuals, w, dof, weighted);
  const standardized = studentize(
    residuals,
    w,
    w.map((wi) => wi / sw),
    chi2,
    dof,
    weighted,
  );
  return {
    ...base,
    u_offset: Math.sqrt(scale / sw),
    residual_sd: Math.sqrt(ss / dof),
    dof,
    standardized,
    outliers: flag(standardized, options.outlierThreshold ?? 3),
  };
}

/**
 * Externally studentized residuals: each residual over the scatter of the other points, so one
 * bad point cannot hide itself by inflating the scatter. For weighted fits the scatter is never
 * taken below what the stated uncertainties imply.
 */
function studentize(
  residuals: readonly number[],
  w: readonly number[],
  leverage: readonly number[],
  chi2: number,
  dof: number,
  weighted: boolean,
): number[] {
  return residuals.map((r, i) => {
    const wi = w[i]!;
    const oneMinusH = 1 - leverage[i]!;
    if (oneMinusH <= 1e-12) return Number.NaN;
    const wr2 = wi * r * r;
    const others = dof > 1 ? Math.max(0, (chi2 - wr2 / oneMinusH) / (dof - 1)) : Number.NaN;
    const s2 = weighted ? Math.max(1, Number.isNaN(others) ? 1 : others) : others;
    return (Math.sqrt(wi) * r) / Math.sqrt(s2 * oneMinusH);
  });
}

function flag(standardized: readonly number[], threshold: number): number[] {
  const out: number[] = [];
  standardized.forEach((z, i) => {
    if (Math.abs(z) > threshold) out.push(i);
  });
  return out;
}

function checkFinite(points: readonly FitPoint[], where: string): void {
  points.forEach((p, i) => {
    if (
      !Number.isFinite(p.x) ||
      !Number.isFinite(p.y) ||
      (p.u !== undefined && !(p.u >= 0 && Number.isFinite(p.u)))
    ) {
      throw makeError(
        ErrorCodes.CALIBRATION_FIT,
        `point ${i + 1} is not a finite reading (nominal ${p.x}, reference ${p.y}, u ${String(p.u)})`,
        where,
        'Retake that point; every nominal and reference value must be a number and every uncertainty ≥ 0.',
      );
    }
  });
}
