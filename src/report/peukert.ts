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

/** A run offered to the Peukert fit, with what decides whether it belongs with the others. */
export interface PeukertCandidate extends PeukertRun {
  name: string;
  chemistry: string;
  cells: number;
  /** The rated capacity given for it, Ah, or null. */
  ratedAh: number | null;
  /** What it gave down to its cutoff, Ah. */
  capacityAh: number;
  endReason: string;
}

export interface PeukertSelection {
  used: PeukertCandidate[];
  excluded: Array<{ name: string; why: string }>;
  /** What the used runs share, in words ("1 × li-ion, rated 2.6 Ah"). */
  group: string | null;
}

/**
 * Capacities further apart than this factor are not one kind of cell: the rate changes what a
 * cell gives by tens of percent, not by a factor of two (common practice).
 */
export const SAME_KIND_FACTOR = 2;

/**
 * Which runs one Peukert law can describe: runs to the cutoff of one chemistry and cell count,
 * and of one rated capacity (when given) or capacities within SAME_KIND_FACTOR of each other.
 * The largest such group is kept; every other run is named with the reason it was left out.
 */
export function selectPeukertRuns(runs: readonly PeukertCandidate[]): PeukertSelection {
  const excluded: Array<{ name: string; why: string }> = [];
  const ended = runs.filter((r) => {
    if (r.endReason === 'cutoff') return true;
    excluded.push({ name: r.name, why: `ended by ${r.endReason}, not at its cutoff` });
    return false;
  });
  const key = (r: PeukertCandidate): string =>
    `${r.cells} × ${r.chemistry}${r.ratedAh !== null ? `, rated ${r.ratedAh} Ah` : ''}`;
  const groups = new Map<string, PeukertCandidate[]>();
  for (const r of ended) groups.set(key(r), [...(groups.get(key(r)) ?? []), r]);
  const [group, members] = [...groups.entries()].sort((a, b) => b[1].length - a[1].length)[0] ?? [
    null,
    [],
  ];
  for (const r of ended)
    if (key(r) !== group) excluded.push({ name: r.name, why: `${key(r)}, not ${group}` });
  const caps = members.map((r) => r.capacityAh).sort((a, b) => a - b);
  const median = caps[Math.floor(caps.length / 2)] ?? 0;
  const used = members.filter((r) => {
    const ok =
      r.capacityAh * SAME_KIND_FACTOR >= median && r.capacityAh <= median * SAME_KIND_FACTOR;
    if (!ok)
      excluded.push({
        name: r.name,
        why: `gave ${r.capacityAh.toPrecision(3)} Ah where the others gave about ${median.toPrecision(3)} Ah: another kind of cell`,
      });
    return ok;
  });
  return { used, excluded, group };
}
