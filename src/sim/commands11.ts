/**
 * What a protocol 1.1 rig answers to a command (docs/protocol.md, "Version 1.1"), decided
 * without touching the rig: an acknowledgement with the change to make, or a refusal (`E`
 * line, nothing changes). The simulated rig applies the change.
 */
import type { ChannelMode, HostCommand, HostCommand11 } from '../protocol/messages.js';
import { MODE_LETTER } from '../protocol/messages.js';
import type { SimChannel } from './sim-channel.js';

export type Decision11 =
  { refuse: string } | { ack: string; mode?: ChannelMode; setpointRaw?: number };

type Command = Extract<HostCommand, { command: 'LOAD' }> | HostCommand11;

const NO_SETPOINT = 'E,SETPOINT,no current set: send ISET before discharging';

/** The answer of a 1.1 rig to LOAD, MODE, ISET or PSET on channel `c` (undefined: no such channel). */
export function decide11(cmd: Command, c: SimChannel | undefined): Decision11 {
  if (!c) return { refuse: `E,CHANNEL,no channel ${cmd.channel}` };
  const cc = c.capability?.constantCurrent ?? null;
  switch (cmd.command) {
    case 'LOAD':
      if (cmd.on && cc && c.setpointRaw === 0) return { refuse: NO_SETPOINT };
      return {
        ack: `A,LOAD,${cmd.channel},${cmd.on ? 1 : 0}`,
        mode: cmd.on ? 'discharge' : 'rest',
      };
    case 'MODE':
      if (cmd.mode === 'charge' && !c.charger)
        return { refuse: `E,CAPABLE,no charger on channel ${cmd.channel}` };
      if (cmd.mode === 'discharge' && cc && c.setpointRaw === 0) return { refuse: NO_SETPOINT };
      return { ack: `A,MODE,${cmd.channel},${MODE_LETTER[cmd.mode]}`, mode: cmd.mode };
    case 'ISET':
      if (!cc)
        return { refuse: `E,CAPABLE,channel ${cmd.channel} has a switched load: no setpoint` };
      if (cmd.raw < cc.iMinRaw || cmd.raw > cc.iMaxRaw)
        return { refuse: `E,RANGE,setpoint outside ${cc.iMinRaw}..${cc.iMaxRaw} counts` };
      return { ack: `A,ISET,${cmd.channel},${cmd.raw}`, setpointRaw: cmd.raw };
    case 'PSET':
      return { refuse: 'E,CAPABLE,no constant power on this rig: use ISET' };
  }
}
