import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import { meaningful } from '../core/meaningful.js';
import type { ChemistryProfile } from './chemistry-types.js';

/** Most cells in series a run accepts. */
export const MAX_CELLS = 64;

/** A reading below this many volts is taken as a reversed connection rather than noise. */
export const REVERSED_BELOW_V = -0.05;

/** Comparisons of volts use this much slack so that 3 × 4.25 is not refused as 12.750000001. */
const EPS_V = 1e-9;

export interface ResolvedCutoff {
  /** End-of-discharge volts per cell. */
  perCell: number;
  /** End-of-discharge volts for the whole series string. */
  total: number;
  /** Where the value came from: the profile's source, or the option that set it. */
  source: string;
  /** True when the value came from the user rather than the profile's default. */
  fromUser: boolean;
}

function round(x: number, digits = 6): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}

/** Volts for messages: up to three decimals, trailing zeros dropped but at least two kept. */
export function fmtV(x: number): string {
  const s = round(x, 3).toFixed(3);
  return s.endsWith('0') ? s.slice(0, -1) : s;
}

/** " Did you mean 3.0 V?" when a cutoff read as millivolts falls where a cutoff belongs. */
function millivoltHint(value: number, floorV: number, nominalV: number): string {
  const volts = value / 1000;
  return volts >= floorV && volts < nominalV
    ? ` Did you mean ${meaningful(volts)} V? ${meaningful(value)} looks like mV.`
    : '';
}

/** Checks a cell count: an integer from 1 to 64. Returns it, or throws CV_USAGE. */
export function validateCells(cells: number, where = '--cells'): number {
  if (!Number.isInteger(cells) || cells < 1 || cells > MAX_CELLS) {
    throw makeError(
      ErrorCodes.USAGE,
      `Cell count ${String(cells)} is not possible`,
      where,
      `Give the number of cells in series as a whole number from 1 to ${MAX_CELLS}.`,
    );
  }
  return cells;
}

/**
 * The end-of-discharge voltage for `cells` cells in series: the profile's default, or the
 * user's request when it is at or above the safety floor and below nominal.
 * Throws CV_CUTOFF_BELOW_FLOOR (exit 2) for a request below the floor, CV_USAGE otherwise.
 */
export function resolveCutoff(
  profile: ChemistryProfile,
  cells: number,
  requestedPerCell?: number,
  where = '--cutoff',
): ResolvedCutoff {
  validateCells(cells);
  if (requestedPerCell === undefined) {
    const perCell = profile.cutoff_V_per_cell.value;
    return {
      perCell,
      total: round(perCell * cells),
      source: profile.cutoff_V_per_cell.source,
      fromUser: false,
    };
  }
  if (!Number.isFinite(requestedPerCell)) {
    throw makeError(
      ErrorCodes.USAGE,
      `Cutoff ${String(requestedPerCell)} is not a number`,
      where,
      `Give the end-of-discharge voltage per cell in volts, e.g. ${fmtV(profile.cutoff_V_per_cell.value)}.`,
    );
  }
  const floor = profile.floor_V_per_cell;
  if (requestedPerCell < floor.value - EPS_V) {
    throw makeError(
      ErrorCodes.CUTOFF_BELOW_FLOOR,
      `Cutoff ${fmtV(requestedPerCell)} V per cell is below the ${profile.id} safety floor of ` +
        `${fmtV(floor.value)} V per cell (source: ${floor.source})`,
      where,
      `Choose ${fmtV(floor.value)} V per cell or more (the default is ` +
        `${fmtV(profile.cutoff_V_per_cell.value)} V); the floor cannot be lowered by any option or command. ` +
        "To follow a cell maker's datasheet that allows less, add a chemistry profile for that cell " +
        'with its own floor and the datasheet as its source, and run with --chemistries-file <file> ' +
        '--chemistry <its id> (docs/chemistry-profiles.md).',
    );
  }
  const nominal = profile.nominal_V_per_cell;
  if (requestedPerCell >= nominal.value - EPS_V) {
    throw makeError(
      ErrorCodes.USAGE,
      `Cutoff ${fmtV(requestedPerCell)} V per cell is at or above the ${profile.id} nominal voltage of ` +
        `${fmtV(nominal.value)} V per cell, so the run would end at once`,
      where,
      `Give the cutoff per cell in volts, not for the whole string: between ${fmtV(floor.value)} and ` +
        `${fmtV(nominal.value)} V (the default is ${fmtV(profile.cutoff_V_per_cell.value)} V).` +
        millivoltHint(requestedPerCell, floor.value, nominal.value),
    );
  }
  return {
    perCell: requestedPerCell,
    total: round(requestedPerCell * cells),
    source: `user (${where})`,
    fromUser: true,
  };
}

/** A chemistry and a range of cell counts a voltage is plausible for. */
export interface ChemistryFit {
  id: string;
  minCells: number;
  maxCells: number;
}

/**
 * Which chemistry × cell count combinations a resting voltage fits: per-cell voltage between
 * the default cutoff and the highest resting voltage, so the cell would have charge to give.
 */
export function fitsFor(profiles: readonly ChemistryProfile[], restV: number): ChemistryFit[] {
  const fits: ChemistryFit[] = [];
  if (!Number.isFinite(restV) || restV <= 0) return fits;
  for (const p of profiles) {
    const lo = Math.ceil(restV / p.max_rest_V_per_cell.value - EPS_V);
    const hi = Math.floor(restV / p.cutoff_V_per_cell.value - EPS_V);
    // the cell must sit strictly above the cutoff: hi cells give restV/hi > cutoff
    const minCells = Math.max(1, lo);
    let maxCells = Math.min(MAX_CELLS, hi);
    if (maxCells >= 1 && restV / maxCells <= p.cutoff_V_per_cell.value + EPS_V) maxCells -= 1;
    if (minCells <= maxCells) fits.push({ id: p.id, minCells, maxCells });
  }
  return fits;
}

/** "4.12 V fits 1 × li-ion, 3 × nimh or 2 × lead-acid" (or an empty string when nothing fits). */
export function describeFits(restV: number, fits: readonly ChemistryFit[]): string {
  if (fits.length === 0) return '';
  const parts = fits.map((f) =>
    f.minCells === f.maxCells ? `${f.minCells} × ${f.id}` : `${f.minCells}–${f.maxCells} × ${f.id}`,
  );
  const list =
    parts.length === 1 ? parts[0] : `${parts.slice(0, -1).join(', ')} or ${parts.at(-1)}`;
  return `${fmtV(restV)} V fits ${list}`;
}

export type RestRefusal =
  | 'not_a_reading'
  | 'reversed'
  | 'below_min_rest'
  | 'above_max_rest'
  | 'at_or_below_cutoff'
  | 'beyond_range';

export type RestCheck =
  { ok: true } | { ok: false; reason: RestRefusal; error: CellvigilError; fits: ChemistryFit[] };

/**
 * The start check on the resting (open-circuit) voltage of the string, before any load is
 * switched on. `alternatives` are the profiles to suggest when the voltage does not fit
 * (all loaded profiles, ideally); by default only other cell counts of this chemistry.
 * A refusal carries a CV_PRECHECK_REFUSED error (exit 2) for the caller to throw or report.
 */
export function checkRestingVoltage(
  profile: ChemistryProfile,
  cells: number,
  restV: number,
  cutoffPerCell: number,
  alternatives: readonly ChemistryProfile[] = [profile],
): RestCheck {
  validateCells(cells);
  const where = `resting voltage, ${cells} × ${profile.id}`;
  // this chemistry's other cell counts first, then the rest in file order
  const fits = fitsFor([profile, ...alternatives.filter((p) => p.id !== profile.id)], restV);
  const hint = describeFits(restV, fits);
  const hintText = hint === '' ? '' : ` ${hint}.`;
  const refuse = (reason: RestRefusal, what: string, fix: string): RestCheck => ({
    ok: false,
    reason,
    fits,
    error: makeError(ErrorCodes.PRECHECK_REFUSED, what, where, fix),
  });

  if (!Number.isFinite(restV)) {
    return refuse(
      'not_a_reading',
      `The rig gave no usable voltage reading (${String(restV)})`,
      'Check the rig link and its voltage channel, then start again. Nothing was switched on.',
    );
  }
  const plural = cells === 1 ? 'cell' : 'cells';
  if (restV < REVERSED_BELOW_V) {
    return refuse(
      'reversed',
      `Reads ${fmtV(restV)} V: a negative voltage means a reversed connection`,
      'Disconnect, check the polarity of the cell and the leads, then start again. Nothing was switched on.',
    );
  }
  const minRest = profile.min_rest_V_per_cell.value;
  if (restV < minRest * cells - EPS_V) {
    return refuse(
      'below_min_rest',
      `Reads ${fmtV(restV)} V: less than ${cells} ${plural} of ${profile.id} can hold at rest ` +
        `(min ${fmtV(minRest)} V/cell)`,
      'A missing, reversed or ruined cell? Check the connections and the cell count; do not ' +
        `discharge a cell that has sat this low.${hintText} Nothing was switched on.`,
    );
  }
  const maxRest = profile.max_rest_V_per_cell.value;
  if (restV > maxRest * cells + EPS_V) {
    return refuse(
      'above_max_rest',
      `Reads ${fmtV(restV)} V: more than ${cells} ${plural} of ${profile.id} can hold at rest ` +
        `(max ${fmtV(maxRest)} V/cell)`,
      `Wrong chemistry or cell count? Check --chemistry and --cells.${hintText} Nothing was switched on.`,
    );
  }
  const cutoffTotal = cutoffPerCell * cells;
  if (restV <= cutoffTotal + EPS_V) {
    return refuse(
      'at_or_below_cutoff',
      `Reads ${fmtV(restV)} V, at or below the end-of-discharge voltage of ${fmtV(round(cutoffTotal))} V ` +
        `(${cells} × ${fmtV(cutoffPerCell)} V): nothing to discharge`,
      `Charge the ${plural} first, or check --cells and --cutoff.${hintText} Nothing was switched on.`,
    );
  }
  return { ok: true };
}
