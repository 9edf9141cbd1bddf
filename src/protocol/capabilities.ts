/**
 * What a rig can do, learnt from its hello exchange, and the one gate every host command of
 * protocol 1.1 goes through: a command the rig did not declare (any 1.1 command to a v1 rig, a
 * charge on a channel without a charger, a setpoint outside the declared range) is refused
 * here, before a byte is written (docs/protocol.md, "Version 1.1").
 */
import { ErrorCodes, makeError, type CellvigilError } from '../core/errors.js';
import { encodeCommand, frameLine } from './codec.js';
import type { DecodeResult11 } from './codec11.js';
import {
  MODE_LETTER,
  type CapabilityFrame,
  type HelloFrame,
  type HostCommand,
  type HostCommand11,
} from './messages.js';

export type ChannelCapability = Omit<CapabilityFrame, 'kind'>;

export type RigCapabilities =
  | { protocol: '1.0'; rigId: string; channels: number }
  | { protocol: '1.1'; rigId: string; channels: readonly ChannelCapability[] };

export type Rig11 = Extract<RigCapabilities, { protocol: '1.1' }>;

/**
 * Reads the hello exchange: a 1.1 rig follows its `H` line at once with one `K` line per
 * channel, a v1 rig with anything else. Feed it every decoded line from the hello on; it
 * answers null while it cannot tell yet, then the capabilities or an error (a damaged
 * exchange: ask for a hello again). Pure: it only watches, the caller handles each line as usual.
 */
export class HelloExchange {
  private hello: HelloFrame | null = null;
  private caps: ChannelCapability[] = [];

  feed(r: DecodeResult11): RigCapabilities | CellvigilError | null {
    if (r.ok && r.message.kind === 'hello') {
      this.hello = r.message;
      this.caps = [];
      return null;
    }
    const hello = this.hello;
    if (!hello) return null;
    if (!r.ok) return this.fail(`a damaged line (${r.reason}) came inside the hello exchange`);
    if (r.message.kind !== 'capability') {
      if (this.caps.length > 0)
        return this.fail(`only ${this.caps.length} of ${hello.channels} capability lines came`);
      this.hello = null;
      return { protocol: '1.0', rigId: hello.rigId, channels: hello.channels };
    }
    const { kind: _kind, ...cap } = r.message;
    if (cap.channel >= hello.channels)
      return this.fail(
        `a capability line for channel ${cap.channel}, beyond its ${hello.channels}`,
      );
    if (this.caps.some((c) => c.channel === cap.channel))
      return this.fail(`two capability lines for channel ${cap.channel}`);
    this.caps.push(cap);
    if (this.caps.length < hello.channels) return null;
    const channels = [...this.caps].sort((a, b) => a.channel - b.channel);
    this.hello = null;
    return { protocol: '1.1', rigId: hello.rigId, channels };
  }

  private fail(what: string): CellvigilError {
    const rig = this.hello?.rigId ?? '?';
    this.hello = null;
    return makeError(
      ErrorCodes.RIG_CAPABILITIES,
      `rig ${rig}: ${what}`,
      'the hello exchange (protocol 1.1)',
      'Ask for a hello again (C,HELLO); if it keeps failing, check the serial line and the firmware. Nothing was switched on by it.',
    );
  }
}

const is11 = (cmd: HostCommand | HostCommand11): cmd is HostCommand11 =>
  cmd.command === 'MODE' || cmd.command === 'ISET' || cmd.command === 'PSET';

function incapable(rig: RigCapabilities, what: string, fix: string): CellvigilError {
  return makeError(ErrorCodes.RIG_INCAPABLE, `rig ${rig.rigId}: ${what}`, 'host command', fix);
}

/** Why `rig` must not be sent `cmd`, or null when it may. */
export function refusal(
  rig: RigCapabilities,
  cmd: HostCommand | HostCommand11,
): CellvigilError | null {
  const count = rig.protocol === '1.0' ? rig.channels : rig.channels.length;
  if ('channel' in cmd && cmd.channel >= count)
    return incapable(rig, `has no channel ${cmd.channel}`, `Use a channel below ${count}.`);
  if (!is11(cmd)) return null;
  if (rig.protocol === '1.0')
    return incapable(
      rig,
      `speaks protocol v1 only and cannot take ${cmd.command}`,
      'Use a switched-load discharge on this rig, or a rig whose hello declares 1.1 capabilities.',
    );
  const cap = rig.channels[cmd.channel]!;
  return refusal11(rig, cap, cmd);
}

function refusal11(
  rig: RigCapabilities,
  cap: ChannelCapability,
  cmd: HostCommand11,
): CellvigilError | null {
  const ch = `channel ${cap.channel}`;
  switch (cmd.command) {
    case 'MODE':
      return cmd.mode === 'charge' && !cap.charger
        ? incapable(rig, `${ch} has no charger`, 'Charge the cell elsewhere, or wire a charger.')
        : null;
    case 'ISET':
      if (cap.load === 'switched')
        return incapable(
          rig,
          `${ch} has a switched load only`,
          'Discharge it through its resistor.',
        );
      if (cmd.raw < cap.iMinRaw || cmd.raw > cap.iMaxRaw)
        return incapable(
          rig,
          `current setpoint ${cmd.raw} counts is outside the ${cap.iMinRaw}..${cap.iMaxRaw} the ${ch} declared`,
          'Choose a current inside the load range.',
        );
      return null;
    case 'PSET':
      if (cap.load !== 'constant_power')
        return incapable(rig, `${ch} offers no constant power`, 'Use a constant current.');
      if (cmd.raw < 1 || cmd.raw > cap.pMaxRaw)
        return incapable(
          rig,
          `power setpoint ${cmd.raw} is outside the 1..${cap.pMaxRaw} the ${ch} declared`,
          'Choose a power inside the load range.',
        );
      return null;
  }
}

/** The wire form of a 1.1 command; private so that nothing skips the check. */
function wire11(cmd: HostCommand11): string {
  switch (cmd.command) {
    case 'MODE':
      return frameLine(`C,MODE,${cmd.channel},${MODE_LETTER[cmd.mode]}`);
    case 'ISET':
      return frameLine(`C,ISET,${cmd.channel},${cmd.raw}`);
    case 'PSET':
      return frameLine(`C,PSET,${cmd.channel},${cmd.raw}`);
  }
}

/**
 * The line to send `cmd` to `rig`; throws CV_RIG_INCAPABLE for a command the rig did not
 * declare, so a 1.1 command never reaches a v1 rig. v1 commands are encoded as before.
 */
export function encodeForRig(rig: RigCapabilities, cmd: HostCommand | HostCommand11): string {
  const refused = refusal(rig, cmd);
  if (refused) throw refused;
  return is11(cmd) ? wire11(cmd) : encodeCommand(cmd);
}

/** The same for code that holds a 1.1 rig already: the type says it cannot be a v1 rig. */
export function encodeCommand11(rig: Rig11, cmd: HostCommand11): string {
  return encodeForRig(rig, cmd);
}
