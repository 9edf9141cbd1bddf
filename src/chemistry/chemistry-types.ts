/** A value from config/chemistries.yaml with the source it was taken from. */
export interface Sourced {
  value: number;
  /** A standard, "common practice" or "from memory". */
  source: string;
}

/** One chemistry profile; all voltages are per cell. */
export interface ChemistryProfile {
  id: string;
  name: string;
  nominal_V_per_cell: Sourced;
  cutoff_V_per_cell: Sourced;
  /** Safety floor: no option or live command may set a cutoff below it. */
  floor_V_per_cell: Sourced;
  /** A resting voltage above this at start means a wrong chemistry or cell count. */
  max_rest_V_per_cell: Sourced;
  /** A resting voltage below this at start means a missing, reversed or ruined cell. */
  min_rest_V_per_cell: Sourced;
  max_temperature_C: Sourced;
  cautions: string[];
  /** How the chemistry may be charged; absent in a file written before charge limits existed. */
  charge?: ChargeLimits;
}

/**
 * How a cell is charged: `cc-cv` constant current then constant voltage to a termination
 * current; `charger` the charger's own end (-dV/dt or a timer, as nickel cells are charged);
 * `none` for primary cells, which must never be charged.
 */
export type ChargeMethod = 'cc-cv' | 'charger' | 'none';

/** Charge limits of a chemistry; every value is per cell, currents are C-rates (× rated Ah). */
export type ChargeLimits =
  | { method: 'none'; source: string }
  | {
      method: 'cc-cv' | 'charger';
      source: string;
      /** Highest charge voltage; no program may ask more, a charge seen above it is aborted. */
      max_V_per_cell: Sourced;
      /** The charge window: outside it a charge is not started, or aborted. */
      min_temperature_C: Sourced;
      max_temperature_C: Sourced;
      /** Charge current used when a program gives none. */
      default_current_C: Sourced;
      /** Highest charge current any program may ask. */
      max_current_C: Sourced;
      /** Longest a charge step may last; a program may ask less, never more. */
      timeout_h: Sourced;
      /** CC-CV only: the current at which the constant-voltage phase ends. */
      termination_current_C?: Sourced;
      /** Per-cell voltage to leave a cell at for storage; absent where storage is charged full. */
      storage_V_per_cell?: Sourced;
    };
