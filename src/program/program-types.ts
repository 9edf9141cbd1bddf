/*
 * A program as written in its file (ProgramFile) and as resolved against a chemistry, a cell
 * count and a rated capacity (Plan): every value absolute (volts for the string, amps, seconds),
 * every ceiling already applied, repeats unrolled into a flat list of steps.
 */

/** A charge step as written. */
export interface ChargeStepSpec {
  /** cc-cv: the host ends the CV phase at the termination current; charger: the charger ends it; time: a fixed time. */
  until?: 'cc-cv' | 'charger' | 'time';
  V_per_cell?: number;
  current_C?: number;
  termination_C?: number;
  timeout_h?: number;
  /** For `until: time`: how long to charge. */
  hours?: number;
}

/** A rest step as written: a time, or until the voltage settles (with a longest time). */
export interface RestStepSpec {
  minutes?: number;
  /** Ends when the voltage changes by less than this many mV per minute (per cell). */
  settle_mV_per_min?: number;
  /** With settle_mV_per_min: the longest the rest may last. */
  max_minutes?: number;
}

/** A discharge step as written: exactly one of the load keys. */
export interface DischargeStepSpec {
  current_A?: number;
  current_C?: number;
  power_W?: number;
  /** The rig's switched load (a resistor): the current falls with the voltage. */
  resistor?: true;
  /** End-of-discharge voltage per cell; the chemistry's default when left out. */
  cutoff_V_per_cell?: number;
  timeout_h?: number;
}

/** The storage step: charge or discharge to the chemistry's storage voltage, then stop. */
export interface StorageStepSpec {
  current_C?: number;
}

export type StepSpec =
  | { charge: ChargeStepSpec }
  | { rest: RestStepSpec }
  | { discharge: DischargeStepSpec }
  | { repeat: { times: number; steps: StepSpec[] } }
  | { storage: StorageStepSpec };

export interface ProgramFile {
  name: string;
  /** Used for C-rates unless the run gives its own. */
  rated_Ah?: number;
  steps: StepSpec[];
}

/** What a discharge draws. */
export type DischargeLoad =
  | { type: 'constant_current'; A: number }
  | { type: 'constant_power'; W: number }
  | { type: 'resistor' };

export interface ChargePlan {
  kind: 'charge';
  method: 'cc-cv' | 'charger' | 'time';
  /** CV voltage of the string (cc-cv), else the abort ceiling. */
  targetV: number;
  /** Above this the charge is aborted (the chemistry's ceiling for the string, with slack). */
  ceilingV: number;
  currentA: number;
  /** cc-cv: the current that ends the CV phase; charger: the current below which the charger has ended. */
  doneBelowA: number | null;
  /** `time`: the planned length; null otherwise. */
  durationS: number | null;
  timeoutS: number;
  minTemperatureC: number;
  maxTemperatureC: number;
}

export interface RestPlan {
  kind: 'rest';
  /** Fixed length, or the longest when settling. */
  durationS: number;
  /** Ends early when |dV/dt| of the string stays below this, V/s; null for a timed rest. */
  settleVPerS: number | null;
}

export interface DischargePlan {
  kind: 'discharge';
  load: DischargeLoad;
  cutoffV: number;
  timeoutS: number | null;
  maxTemperatureC: number;
}

/** Storage: decided at its start from the resting voltage; charge up or discharge down to targetV. */
export interface StoragePlan {
  kind: 'storage';
  targetV: number;
  currentA: number;
  charge: Omit<ChargePlan, 'kind' | 'method' | 'targetV' | 'durationS'>;
  maxTemperatureC: number;
}

export type StepPlan = ChargePlan | RestPlan | DischargePlan | StoragePlan;

export interface PlannedStep {
  plan: StepPlan;
  /** Where the step is in the file, e.g. "steps[2].repeat.steps[0]". */
  path: string;
  /** 1-based repeat pass, or null outside a repeat. */
  cycle: number | null;
}

export interface Plan {
  name: string;
  cells: number;
  /** null when the program uses neither C-rates nor charges. */
  ratedAh: number | null;
  chemistryId: string;
  steps: PlannedStep[];
}
