/**
 * Protocol 1.1 lines (docs/protocol.md, "Version 1.1"): the capability line `K` from the rig, and
 * the host's MODE, ISET and PSET commands as a rig reads them. The host encodes its commands
 * only through `encodeForRig` (capabilities.ts), which refuses a 1.1 command for a v1 rig. Everything v1 is decoded by the v1
 * codec unchanged, byte for byte; this file only adds what 1.1 adds.
 */
import { checkFrame, decodeRigLine, decodeHostLine, frameLine, reject, uint } from './codec.js';
import {
  type CapabilityFrame,
  type ChannelMode,
  type HostCommand,
  type HostCommand11,
  type LoadKind,
  type RejectReason,
  type RigMessage11,
} from './messages.js';

export type DecodeResult11 =
  { ok: true; message: RigMessage11 } | { ok: false; reason: RejectReason; detail: string };

const LOAD_LETTER: Record<LoadKind, 'S' | 'I' | 'P'> = {
  switched: 'S',
  constant_current: 'I',
  constant_power: 'P',
};
const LOAD_OF: Record<string, LoadKind> = {
  S: 'switched',
  I: 'constant_current',
  P: 'constant_power',
};
const MODE_OF: Record<string, ChannelMode> = { R: 'rest', D: 'discharge', C: 'charge' };

/** The checks of a `K` line's fields beyond their syntax; null when it is consistent. */
function capabilityProblem(c: Omit<CapabilityFrame, 'kind'>): string | null {
  if (c.load === 'switched' && (c.iMinRaw !== 0 || c.iMaxRaw !== 0 || c.pMaxRaw !== 0))
    return 'a switched load has no setpoint range: i_min, i_max and p_max must be 0';
  if (c.load !== 'switched' && (c.iMaxRaw < 1 || c.iMinRaw > c.iMaxRaw))
    return `current setpoint range ${c.iMinRaw}..${c.iMaxRaw} is empty`;
  if ((c.load === 'constant_power') !== c.pMaxRaw > 0)
    return 'p_max must be above 0 exactly when the load offers constant power (P)';
  return null;
}

function decodeCapability(f: string[], payload: string, adcMax: number): DecodeResult11 {
  if (f.length !== 7)
    return reject('field_count', `capability line has ${f.length} fields, expected 7`);
  const load = LOAD_OF[f[2]!];
  const nums = [uint(f[1]!, 15), uint(f[3]!, adcMax), uint(f[4]!, adcMax), uint(f[5]!, adcMax)];
  if (!load || nums.some((n) => n === null) || (f[6] !== '0' && f[6] !== '1'))
    return reject('not_numeric', payload);
  if (nums.some((n) => n === -1)) return reject('out_of_range', payload);
  const [channel, iMinRaw, iMaxRaw, pMaxRaw] = nums as number[];
  const cap = { channel: channel!, load, iMinRaw: iMinRaw!, iMaxRaw: iMaxRaw!, pMaxRaw: pMaxRaw! };
  const message: CapabilityFrame = { kind: 'capability', ...cap, charger: f[6] === '1' };
  const problem = capabilityProblem(message);
  if (problem) return reject('out_of_range', `${payload}: ${problem}`);
  return { ok: true, message };
}

/**
 * Decodes one rig line of a 1.1 rig: every v1 line exactly as `decodeRigLine` does, plus the
 * capability line. Never throws.
 */
export function decodeRigLine11(line: string, adcBits = 16): DecodeResult11 {
  const v1 = decodeRigLine(line, adcBits);
  if (v1.ok || v1.reason !== 'unknown_type') return v1;
  const checked = checkFrame(line);
  if ('ok' in checked) return checked;
  const f = checked.payload.split(',');
  if (f[0] !== 'K') return v1;
  return decodeCapability(f, checked.payload, 2 ** adcBits - 1);
}

/** Encodes a capability line; the emulated and simulated rigs and the tests speak it too. */
export function encodeCapability(c: Omit<CapabilityFrame, 'kind'>): string {
  const problem = capabilityProblem(c);
  if (problem) throw new RangeError(`capability of channel ${c.channel}: ${problem}`);
  const load = LOAD_LETTER[c.load];
  const charger = c.charger ? 1 : 0;
  return frameLine(`K,${c.channel},${load},${c.iMinRaw},${c.iMaxRaw},${c.pMaxRaw},${charger}`);
}

/** Setpoints are counts of a 16-bit ADC at most (`adc_bits` is 1..24, but no rig sends more). */
const SETPOINT_MAX = 0xffffff;

/**
 * Decodes a host line of either version (a rig's side: the simulated rig, the tests). The v1
 * commands come back exactly as `decodeHostLine` gives them.
 */
export function decodeHostLine11(line: string): HostCommand | HostCommand11 | { error: string } {
  const v1 = decodeHostLine(line);
  if (!('error' in v1) || v1.error !== 'field_count') return v1;
  const checked = checkFrame(line);
  if ('ok' in checked) return { error: 'unexpected' };
  const f = checked.payload.split(',');
  const verb = f[1];
  if ((verb !== 'MODE' && verb !== 'ISET' && verb !== 'PSET') || f.length !== 4)
    return { error: 'field_count' };
  const ch = uint(f[2]!, 15);
  if (ch === null || ch < 0) return { error: 'out_of_range' };
  if (verb === 'MODE') {
    const mode = MODE_OF[f[3]!];
    return mode ? { command: 'MODE', channel: ch, mode } : { error: 'out_of_range' };
  }
  const raw = uint(f[3]!, SETPOINT_MAX);
  if (raw === null || raw < 0) return { error: 'out_of_range' };
  return { command: verb, channel: ch, raw };
}
