/**
 * Capacity per cycle of a program run and its cycle-to-cycle trend. Only a discharge of the
 * program that reached its cutoff is a capacity; one stopped short, or the storage step, is not.
 */
import type { SegmentEnd, SegmentRecord } from '../program/sequence-types.js';

/** A segment as recorded, with the charge it delivered (recomputed from the rows). */
export interface SegmentCapacity {
  segment: Pick<SegmentRecord, 'index' | 'kind' | 'purpose' | 'cycle'> & {
    end_reason: SegmentEnd | null;
  };
  capacityAh: number;
  /** Expanded uncertainty (k = 2), when known. */
  expandedAh?: number;
}

export interface CyclePoint {
  /** The repeat pass, or the count of full discharges when the program has no repeat. */
  cycle: number;
  segmentIndex: number;
  capacityAh: number;
  expandedAh: number | null;
  /** This cycle's capacity over the first's. */
  ofFirst: number;
}

export interface CapacityTrend {
  points: CyclePoint[];
  /** Least-squares slope of capacity against cycle, Ah per cycle; null under two cycles. */
  slopeAhPerCycle: number | null;
  /** The slope as a share of the fitted first cycle's capacity, per cycle. */
  slopeShare: number | null;
  /** Last minus first, Ah. */
  changeAh: number | null;
  /**
   * Whether last − first is larger than the two expanded uncertainties combined in quadrature;
   * null when either is unknown.
   */
  changeBeyondUncertainty: boolean | null;
}

/** The full discharges of a program run, one per cycle. */
export function cyclePoints(segments: readonly SegmentCapacity[]): CyclePoint[] {
  const full = segments.filter(
    (s) =>
      s.segment.kind === 'discharge' &&
      s.segment.purpose === 'program' &&
      s.segment.end_reason === 'cutoff' &&
      Number.isFinite(s.capacityAh) &&
      s.capacityAh > 0,
  );
  const first = full[0]?.capacityAh ?? NaN;
  return full.map((s, i) => ({
    cycle: s.segment.cycle ?? i + 1,
    segmentIndex: s.segment.index,
    capacityAh: s.capacityAh,
    expandedAh: s.expandedAh ?? null,
    ofFirst: s.capacityAh / first,
  }));
}

/** Ordinary least squares of y on x: slope and intercept. */
function leastSquares(xs: readonly number[], ys: readonly number[]): { m: number; b: number } {
  const n = xs.length;
  const mx = xs.reduce((a, x) => a + x, 0) / n;
  const my = ys.reduce((a, y) => a + y, 0) / n;
  let sxy = 0;
  let sxx = 0;
  for (let i = 0; i < n; i++) {
    sxy += (xs[i]! - mx) * (ys[i]! - my);
    sxx += (xs[i]! - mx) ** 2;
  }
  const m = sxx === 0 ? 0 : sxy / sxx;
  return { m, b: my - m * mx };
}

/** Capacity per cycle and its trend. */
export function capacityTrend(segments: readonly SegmentCapacity[]): CapacityTrend {
  const points = cyclePoints(segments);
  const first = points[0];
  const last = points.at(-1);
  if (points.length < 2 || first === undefined || last === undefined)
    return {
      points,
      slopeAhPerCycle: null,
      slopeShare: null,
      changeAh: null,
      changeBeyondUncertainty: null,
    };
  const { m, b } = leastSquares(
    points.map((p) => p.cycle),
    points.map((p) => p.capacityAh),
  );
  const changeAh = last.capacityAh - first.capacityAh;
  const u =
    first.expandedAh !== null && last.expandedAh !== null
      ? Math.hypot(first.expandedAh, last.expandedAh)
      : null;
  return {
    points,
    slopeAhPerCycle: m,
    slopeShare: m / (m * first.cycle + b),
    changeAh,
    changeBeyondUncertainty: u === null ? null : Math.abs(changeAh) > u,
  };
}
