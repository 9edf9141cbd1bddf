/*
 * What the program sequencer reads (frames), what it asks the run to send (intents) and what it
 * records (segments). Intents are typed, not wire text: the protocol layer encodes them, and a
 * rig that cannot do one (a constant-current setpoint on a switched-load rig) is refused there.
 */
import type { DischargeLoad } from './program-types.js';

/** The channel's mode, as commanded and as the rig reports it. */
export type ChannelMode = 'rest' | 'discharge' | 'charge';

/** One measured frame, already calibrated. */
export interface ProgramFrame {
  /** Host monotonic time, ms. */
  t_ms: number;
  /** Voltage of the series string, V. */
  voltageV: number;
  /** Signed current, A: positive out of the cell (discharge), negative into it (charge). */
  currentA: number;
  temperatureC: number | null;
  /** The mode the rig says is active. */
  mode: ChannelMode;
  /** The rig says its regulated load cannot hold the setpoint (flag bit 5 of protocol 1.1). */
  setpointNotHeld?: boolean;
}

export type Intent =
  | { type: 'set-mode'; mode: ChannelMode }
  | { type: 'set-load'; load: DischargeLoad }
  | { type: 'set-charge'; currentA: number; voltageV: number };

/** Why a segment ended as planned: the program goes on to its next step. */
const PLANNED_ENDS = [
  'termination_current',
  'charger_ended',
  'charge_time',
  'cutoff',
  'storage_voltage',
  'discharge_time',
  'setpoint_not_held',
  'rest_time',
  'voltage_settled',
] as const;

/** Why a segment ended and stopped the program, leaving the channel at rest. */
const ABORT_ENDS = [
  'charge_timeout',
  'over_temperature',
  'under_temperature',
  'temperature_unknown',
  'over_voltage',
  'mode_not_confirmed',
  'stopped',
] as const;

/** Why a segment ended: the planned ends, then the aborts. */
export const SEGMENT_ENDS = [...PLANNED_ENDS, ...ABORT_ENDS] as const;

export type SegmentEnd = (typeof SEGMENT_ENDS)[number];

/** The session state a channel is in during a segment of each kind (the rows' `state`). */
export const SEGMENT_STATE = {
  rest: 'resting',
  discharge: 'discharging',
  charge: 'charging',
} as const satisfies Record<ChannelMode, string>;

const ABORTS: ReadonlySet<SegmentEnd> = new Set(ABORT_ENDS);

/** True when this end stops the program and leaves the channel at rest. */
export function isAbort(end: SegmentEnd): boolean {
  return ABORTS.has(end);
}

/** One step of a run as it happened: the record a run folder keeps per segment. */
export interface SegmentRecord {
  /** 0-based, in the order the segments ran. */
  index: number;
  kind: ChannelMode;
  /** `storage` for the last step's charge or discharge to the storage voltage. */
  purpose: 'program' | 'storage';
  /** Where the step is in the program file, e.g. "steps[0].repeat.steps[2]". */
  step: string;
  /** 1-based repeat pass, null outside a repeat. */
  cycle: number | null;
  started_ms: number;
  ended_ms: number | null;
  end_reason: SegmentEnd | null;
  /** What the step was set to: amps, watts, volts, seconds, as planned. */
  setpoint: Record<string, number | string | null>;
}

/** What one call to the sequencer produced. */
export interface SequencerUpdate {
  intents: Intent[];
  /** Segments that ended on this frame (at most two: a segment and the abort of the next). */
  ended: SegmentRecord[];
  started: SegmentRecord | null;
  /** Set once, when the program finishes or aborts. */
  finished: { aborted: boolean; reason: SegmentEnd | 'complete' } | null;
}
