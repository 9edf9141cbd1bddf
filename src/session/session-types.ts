import type { HostCommand } from '../protocol/messages.js';

export type EndReason =
  | 'cutoff'
  | 'over_temperature'
  | 'stopped'
  | 'link_lost'
  | 'fault'
  | 'implausible_reading'
  | 'open_load'
  // A program run's own (docs/programs.md): every step done, a charge that never ended, a
  // charge step's safety end (its detail names the segment's end).
  | 'program_complete'
  | 'charge_timeout'
  | 'charge_fault';

/** Ends on a safety limit (exit code 3); the others are the normal end of a run. */
export const SAFETY_END_REASONS: readonly EndReason[] = [
  'over_temperature',
  'link_lost',
  'fault',
  'implausible_reading',
  'open_load',
  'charge_timeout',
  'charge_fault',
];

/** A run that never switched the load on ends `refused` (exit 2) instead of with an end reason. */
export type SessionEnd = EndReason | 'refused';

export type SessionState =
  | 'waiting'
  | 'precheck'
  | 'starting'
  | 'discharging'
  | 'stopping'
  | 'ended'
  // A program run's segments (discharging is shared with a plain run).
  | 'charging'
  | 'resting';

/** One frame after the time base, the analog chain and the calibration. */
export interface Measurement {
  hostMs: number;
  dtMs: number;
  gap: boolean;
  volts: number;
  amps: number;
  celsius: number;
  thermistor: 'ok' | 'open' | 'short';
  flags: number;
  /** The uncorrected current's magnitude (a program's per-segment uncertainty budget). */
  nominalA?: number;
}

export type Action =
  | { type: 'send'; command: HostCommand }
  | { type: 'event'; name: string; detail: Record<string, unknown> }
  | { type: 'end'; reason: SessionEnd; detail: string; loadOffConfirmed: boolean };
