/**
 * What a rig's hello must agree with before any load is switched: the channel asked for exists.
 * Used wherever a hello is handled (calibrate's link, the run's pipeline).
 */
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import type { HelloFrame } from './messages.js';

/** The error for a `--channel` the rig does not have, or null. */
export function missingChannel(
  channel: number,
  hello: Pick<HelloFrame, 'channels' | 'rigId'>,
): CellvigilError | null {
  if (channel < hello.channels) return null;
  const range = hello.channels === 1 ? 'only channel 0' : `channels 0 to ${hello.channels - 1}`;
  return makeError(
    ErrorCodes.USAGE,
    `rig ${hello.rigId} reports ${hello.channels} channel${hello.channels === 1 ? '' : 's'} in its hello; channel ${channel} does not exist (channels count from 0)`,
    '--channel',
    `Give --channel with ${range}, the one the cell is wired to; nothing was switched on.`,
  );
}
