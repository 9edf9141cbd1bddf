import type { FleetRunRequest } from '../fleet/fleet-link.js';

/** What the user asked `run` for, as the CLI parsed it (`fleet`: what `--broker …` resolved). */
export interface RunRequest extends FleetRunRequest {
  /** Serial device path (a real rig or a pseudo-terminal). */
  port?: string;
  /** Simulated-rig scenario name (config/sim-scenarios.yaml). */
  sim?: string;
  /** Virtual-clock speed of the simulated rig; 1 is real time. */
  speed: number;
  /** Rig profile file; the package's bench profile when absent. */
  rig?: string;
  calibration?: string;
  chemistry?: string;
  chemistriesFile?: string;
  cells?: number;
  /** End-of-discharge volts per cell. */
  cutoff?: number;
  label?: string;
  runs: string;
  /** host:port of the live feed, or null for none. */
  listen: string | null;
  once: boolean;
  /** Discharge schedule: a YAML file or the inline form (docs/schedules.md); continuous when absent. */
  schedule?: string;
  /** Run folder of an interrupted run to continue. */
  resume?: string;
  /** Start a new run even when an unfinished one on the same port could be resumed. */
  fresh?: boolean;
  /** How long the rig's port may stay gone before the run ends as link_lost, s. */
  linkTimeoutS: number;
  /** Serial baud rate; the rig profile's frame.baud when absent. */
  baud?: number;
  /** Sample file size before rotation. */
  rotateBytes: number;
  /** Program file (docs/programs.md): charge, rest and discharge steps instead of one discharge. */
  program?: string;
  /** Rated capacity for the program's C-rates, Ah; replaces the file's rated_Ah. */
  rated?: number;
  /** Rig channel to discharge. */
  channel: number;
  /** What is written on the cell (free text); kept in the manifest and the result. */
  cellId?: string;
  /** The cell registry a finished run with a cell id is filed in; absent: not filed. */
  registry?: string;
}

export const DEFAULT_ROTATE_BYTES = 16 * 1024 * 1024;
export const DEFAULT_LISTEN = '127.0.0.1:8507';
