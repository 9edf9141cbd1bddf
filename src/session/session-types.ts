import type { HostCommand } from '../protocol/messages.js';

export type EndReason =
  | 'cutoff'
  | 'over_temperature'
  | 'stopped'
  | 'link_lost'
  | 'fault'
  | 'implausible_reading'
  | 'open_load';

/** Ends on a safety limit (exit code 3); the others are the normal end of a run. */
export const SAFETY_END_REASONS: readonly EndReason[] = [
  'over_temperature',
  'link_lost',
  'fault',
  'implausible_reading',
  'open_load',
];

/** A run that never switched the load on ends `refused` (exit 2) instead of with an end reason. */
export type SessionEnd = EndReason | 'refused';

export type SessionState =
  'waiting' | 'precheck' | 'starting' | 'discharging' | 'stopping' | 'ended';

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
}

export type Action =
  | { type: 'send'; command: HostCommand }
  | { type: 'event'; name: string; detail: Record<string, unknown> }
  | { type: 'end'; reason: SessionEnd; detail: string; loadOffConfirmed: boolean };
