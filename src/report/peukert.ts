/**
 * Peukert's law in its hours-rate form, t = H·(C/(I·H))^k: a cell of capacity C at the H-hour
 * rate lasts t hours at a constant current I. Taking logs, ln t = const − k·ln I, so k is the
 * negated slope of a straight-line fit of ln t against ln I over runs at different currents.
 */
import { ErrorCodes, makeError } from '../core/errors.js';

export function peukertHours(
  rateHours: number,
  capacityAh: number,
  k: number,
  currentA: number,
): number {
  return rateHours * (capacityAh / (currentA * rateHours)) ** k;
}

export interface PeukertRun {
  currentA: number;
  hours: number;
}

export interface PeukertFit {
  k: number;
  /** Capacity at the H-hour rate implied by the fit, Ah. */
  capacityAh: number;
  rateHours: number;
  /** Standard uncertainty of k from the fit's residuals (null with two runs). */
  uK: number | null;
  runs: number;
  /** Lowest and highest current of the runs: the fit says nothing outside them. */
  currentRangeA: [number, number];
}

/** Currents closer than this (relative) do not count as different. */
export const MIN_CURRENT_SPREAD = 0.1;

/** Whether the runs span enough current for a fit. */
export function currentsDiffer(runs: readonly PeukertRun[]): boolean {
  const cs = runs.map((r) => r.currentA).filter((c) => c > 0);
  return cs.length >= 2 && Math.max(...cs) > (1 + MIN_CURRENT_SPREAD) * Math.min(...cs);
}

/** Fits k (and C at the H-hour rate) to runs at different currents. */
export function fitPeukert(runs: readonly PeukertRun[], rateHours = 20): PeukertFit {
  const usable = runs.filter((r) => r.currentA > 0 && r.hours > 0);
  if (!currentsDiffer(usable)) {
    throw makeError(
      ErrorCodes.USAGE,
      "Peukert's exponent needs at least two runs at currents more than 10 % apart, each with a positive duration",
      'the runs given',
      'Discharge the same cell (or cells of one batch) at two or more different currents to the same end voltage, then report them together.',
    );
  }
  const xs = usable.map((r) => Math.log(r.currentA));
  const ys = usable.map((r) => Math.log(r.hours));
  const n = xs.length;
  const mx = xs.reduce((a, b) => a + b, 0) / n;
  const my = ys.reduce((a, b) => a + b, 0) / n;
  let sxx = 0;
  let sxy = 0;
  for (let i = 0; i < n; i++) {
    sxx += (xs[i]! - mx) ** 2;
    sxy += (xs[i]! - mx) * (ys[i]! - my);
  }
  const slope = sxy / sxx;
  const intercept = my - slope * mx;
  const k = -slope;
  let uK: number | null = null;
  if (n > 2) {
    let ss = 0;
    for (let i = 0; i < n; i++) ss += (ys[i]! - (intercept + slope * xs[i]!)) ** 2;
    uK = Math.sqrt(ss / (n - 2) / sxx);
  }
  // ln t = ln H + k·ln(C/H) − k·ln I, so the intercept gives C.
  const capacityAh = rateHours * Math.exp((intercept - Math.log(rateHours)) / k);
  const cs = usable.map((r) => r.currentA);
  return {
    k,
    capacityAh,
    rateHours,
    uK,
    runs: n,
    currentRangeA: [Math.min(...cs), Math.max(...cs)],
  };
}
