import type { Clock } from '../core/clock.js';
import type { LiveHub } from '../live/live-hub.js';
import type { Source } from '../sources/source.js';
import type { StationTimers } from './station-timers.js';
import type { ChannelPlan, RigPlan } from './station-types.js';

/** Everything one channel's run needs from the station. */
export interface ChannelRunRequest {
  rig: RigPlan;
  plan: ChannelPlan;
  /** The channel's own view of its rig's shared link. */
  source: Source;
  /** The station's virtual clock for a simulated rig; null for a real rig (host time). */
  clock: Clock | null;
  runs: string;
  /** An interrupted run's folder to continue (through its precheck again), or null for a new run. */
  resume: string | null;
  /** What is written on the cell: the station file's, or the one given when the run was started. */
  cellId: string | null;
  /** The channel's live hub, or null without a live feed. */
  hub: LiveHub | null;
  linkTimeoutS: number;
  /** The station's timers, one set for all its channels, for the run to join. */
  timers: StationTimers;
}

/** How a channel's run ended. */
export interface ChannelOutcome {
  exitCode: number;
  folder: string;
  result: Record<string, unknown>;
}

/** A channel's run while it goes. */
export interface ChannelRun {
  readonly folder: string;
  readonly done: Promise<ChannelOutcome>;
  /** Asks for a stop (load off, result written). */
  stop(by: string): void;
  /** Volts per cell; refused below the chemistry's floor. */
  setCutoffPerCell(volts: number, by: string): { ok: true } | { ok: false; error: string };
  /** A note in the channel's event log; refused when too long or too many. */
  mark(note: string, by: string): { ok: true } | { ok: false; error: string };
}

/** Starts one channel's run: its folder, precheck, limits, state machine and result. */
export type ChannelRunner = (r: ChannelRunRequest) => Promise<ChannelRun>;
