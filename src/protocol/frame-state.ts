/**
 * What a data frame's flags say about its channel under protocol 1.1: the mode, how the
 * current is set, and which way it flows. A v1 frame (bits 2–7 zero) reads as a switched load,
 * on or off, drawing current out of the cell, exactly as v1 means it.
 */
import {
  FLAG_INTO_CELL,
  FLAG_LOAD_ON,
  FLAG_MODE_MASK,
  FLAG_MODE_SHIFT,
  FLAG_RIG_FAULT,
  FLAG_TRIM_AT_BOUND,
  type ChannelMode,
} from './messages.js';

/** How the channel's current is set while it flows; null at rest. */
export type Regulation = 'switched' | 'constant_current' | 'constant_power' | 'charger' | null;

export interface FrameState {
  mode: ChannelMode;
  regulation: Regulation;
  /** Which way the current in `i_raw` flows through the cell. */
  direction: 'out_of_cell' | 'into_cell';
  /** The rig cut its outputs itself (flag bit 1, as in v1). */
  rigFault: boolean;
  /** A regulated load whose trim is at its bound: the current is not the setpoint. */
  setpointNotHeld: boolean;
}

/**
 * The channel's state from a frame's flags, or a reason the combination cannot be true (a load
 * and a charger on together, a charge current with no charger): such a frame must not be
 * integrated, and the host treats it as a rig fault.
 */
export function frameState(flags: number): FrameState | { invalid: string } {
  const load = (flags & FLAG_LOAD_ON) !== 0;
  const into = (flags & FLAG_INTO_CELL) !== 0;
  const code = (flags & FLAG_MODE_MASK) >> FLAG_MODE_SHIFT;
  const base = {
    rigFault: (flags & FLAG_RIG_FAULT) !== 0,
    setpointNotHeld: (flags & FLAG_TRIM_AT_BOUND) !== 0,
  };
  // Bits 6-7 stay reserved and are ignored, as v1 asks of a host.
  if (code === 2) {
    if (load) return { invalid: 'load and charger reported on together' };
    if (!into) return { invalid: 'charge mode with a current out of the cell' };
    if (base.setpointNotHeld) return { invalid: 'trim bound reported while charging' };
    return { mode: 'charge', regulation: 'charger', direction: 'into_cell', ...base };
  }
  if (into) return { invalid: 'a current into the cell outside charge mode' };
  if (code !== 0 && !load) return { invalid: 'a regulated load reported while the load is off' };
  if (code === 0 && base.setpointNotHeld)
    return { invalid: 'trim bound reported for a switched load' };
  const regulation: Regulation = !load
    ? null
    : code === 1
      ? 'constant_current'
      : code === 3
        ? 'constant_power'
        : 'switched';
  return { mode: load ? 'discharge' : 'rest', regulation, direction: 'out_of_cell', ...base };
}
