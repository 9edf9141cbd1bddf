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
}
