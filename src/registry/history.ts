/**
 * A cell's history: its runs in time order with state of health, the capacity fade per year
 * fitted to the trustworthy runs (weighted by each run's uncertainty), and the projected date
 * at which the fitted capacity reaches 80 % of rated. Pure: records in, figures out.
 *
 * 80 % of rated capacity as the end of a cell's service life is common practice for
 * rechargeable cells (stationary lead-acid practice replaces a battery there, IEEE Std 450 and
 * IEEE Std 1188, from memory; the same share is the usual end of life for Li-ion).
 */
import { fitLine } from '../calibration/fit.js';
import { runDoubts, type RunDoubt, type TrustRules } from './grading.js';
import type { RunRecord } from './run-record.js';

export const END_OF_LIFE_SHARE = 0.8;
/** A fade needs at least this many trustworthy runs (a line through two has no scatter to judge). */
export const FADE_MIN_RUNS = 3;
/** …spread over at least this many days, or the slope is mostly noise. */
export const FADE_MIN_SPAN_DAYS = 30;

const MS_PER_YEAR = 365.25 * 86_400_000;

export interface CellInfo {
  cell_id: string;
  chemistry: string;
  rated_Ah: number;
  source: string;
  notes: string;
  registered_at: string;
}

export interface HistoryRow {
  run: RunRecord;
  /** Capacity over rated capacity; null without a rating. */
  soh: number | null;
  /** Mean current over rated capacity (per hour); null without a rating. */
  c_rate: number | null;
  doubts: RunDoubt[];
}

export interface FadeFit {
  runs: number;
  span_years: number;
  /** Time origin of the fit (the first trustworthy run). */
  origin_ms: number;
  /** Fitted capacity at the origin, Ah, and its standard uncertainty. */
  intercept_Ah: number;
  u_intercept_Ah: number;
  /** Change of capacity per year (negative when fading), Ah/a, and its standard uncertainty. */
  per_year_Ah: number;
  u_per_year_Ah: number;
  cov: number;
  /** The same as a share of rated capacity per year; null without a rating. */
  per_year_share: number | null;
  u_per_year_share: number | null;
}

export type EndOfLife =
  | { kind: 'projected'; date_ms: number; u_days: number; reached: boolean }
  | { kind: 'none'; why: string };

export interface CellHistory {
  cell_id: string;
  cell: CellInfo | null;
  rows: HistoryRow[];
  fade: FadeFit | null;
  /** Why there is no fade fit, when there is none. */
  fadeNote: string | null;
  endOfLife: EndOfLife;
}

function fitFade(trusted: readonly RunRecord[], ratedAh: number | null): FadeFit | string {
  if (trusted.length < FADE_MIN_RUNS)
    return `${trusted.length} trustworthy run(s); a fade needs ${FADE_MIN_RUNS}`;
  const origin = trusted[0]!.started_ms;
  const span = trusted[trusted.length - 1]!.started_ms - origin;
  if (span < FADE_MIN_SPAN_DAYS * 86_400_000)
    return `the trustworthy runs span ${(span / 86_400_000).toFixed(0)} days; a fade needs ${FADE_MIN_SPAN_DAYS}`;
  const fit = fitLine(
    trusted.map((r) => ({
      x: (r.started_ms - origin) / MS_PER_YEAR,
      y: r.capacity_Ah,
      u: r.capacity_u_Ah ?? 0,
    })),
    { quantity: 'test date', where: 'fade fit' },
  );
  return {
    runs: trusted.length,
    span_years: span / MS_PER_YEAR,
    origin_ms: origin,
    intercept_Ah: fit.offset,
    u_intercept_Ah: fit.u_offset,
    per_year_Ah: fit.gain,
    u_per_year_Ah: fit.u_gain,
    cov: fit.cov_gain_offset,
    per_year_share: ratedAh === null ? null : fit.gain / ratedAh,
    u_per_year_share: ratedAh === null ? null : fit.u_gain / ratedAh,
  };
}

/** Where the fitted line crosses 80 % of rated, with its uncertainty by first-order propagation. */
export function projectEndOfLife(fade: FadeFit, ratedAh: number, lastRunMs: number): EndOfLife {
  const g = fade.per_year_Ah;
  // A slope within two standard uncertainties of zero projects nothing worth a date.
  if (!(g < 0) || g + 2 * fade.u_per_year_Ah >= 0)
    return { kind: 'none', why: 'no significant fade' };
  const x = (END_OF_LIFE_SHARE * ratedAh - fade.intercept_Ah) / g;
  // ∂x/∂a = −1/g, ∂x/∂g = −x/g (a = intercept, g = slope).
  const varX =
    (fade.u_intercept_Ah ** 2 + x * x * fade.u_per_year_Ah ** 2 + 2 * x * fade.cov) / (g * g);
  const dateMs = fade.origin_ms + x * MS_PER_YEAR;
  return {
    kind: 'projected',
    date_ms: dateMs,
    u_days: (Math.sqrt(Math.max(0, varX)) * MS_PER_YEAR) / 86_400_000,
    reached: dateMs <= lastRunMs,
  };
}

/** Builds the history from the cell (null when not registered) and its runs in any order. */
export function cellHistory(
  cellId: string,
  cell: CellInfo | null,
  runs: readonly RunRecord[],
  trust: TrustRules,
): CellHistory {
  const sorted = [...runs].sort((a, b) => a.started_ms - b.started_ms);
  const rated = cell?.rated_Ah ?? null;
  const rows = sorted.map((run) => ({
    run,
    soh: rated === null ? null : run.capacity_Ah / rated,
    c_rate: rated === null || run.mean_current_A === null ? null : run.mean_current_A / rated,
    doubts: runDoubts(run, trust),
  }));
  const trusted = rows.filter((r) => r.doubts.length === 0).map((r) => r.run);
  const fade = fitFade(trusted, rated);
  let endOfLife: EndOfLife = { kind: 'none', why: 'no fade fit' };
  if (typeof fade !== 'string') {
    endOfLife =
      rated === null
        ? { kind: 'none', why: 'no rated capacity' }
        : projectEndOfLife(fade, rated, trusted[trusted.length - 1]!.started_ms);
  }
  return {
    cell_id: cellId,
    cell,
    rows,
    fade: typeof fade === 'string' ? null : fade,
    fadeNote: typeof fade === 'string' ? fade : null,
    endOfLife,
  };
}
