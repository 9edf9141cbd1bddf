import { crc16, crc16Printable, crcHex } from './crc16.js';
import type { DataFrame, DecodeResult, HostCommand, RejectReason } from './messages.js';

/** Longest line accepted; a data frame at its widest is about 60 characters. */
export const MAX_LINE_LENGTH = 200;

const DEC = /^(0|[1-9][0-9]{0,9})$/;
const HEX_FLAGS = /^[0-9A-Fa-f]{1,2}$/;

export function reject(reason: RejectReason, detail: string): DecodeResult {
  return { ok: false, reason, detail };
}

/** A decimal field without sign, point or leading zero: its value, -1 above `max`, null if not one. */
export function uint(field: string, max: number): number | null {
  if (!DEC.test(field)) return null;
  const n = Number(field);
  return n <= max ? n : -1;
}

/** Adds `|CRC` to a payload: the one way lines are framed, both directions. */
export function frameLine(payload: string): string {
  return `${payload}|${crcHex(payload)}\n`;
}

/** Value of four hex digits at `at`, or -1 when they are not all hex digits. */
function hex4(text: string, at: number): number {
  let v = 0;
  for (let i = at; i < at + 4; i++) {
    const d = hexDigit(text.charCodeAt(i));
    if (d < 0) return -1;
    v = v * 16 + d;
  }
  return v;
}

/** Strips the checksum and verifies it; returns the payload or a reject reason. */
export function checkFrame(line: string): { payload: string } | DecodeResult {
  const text = line.endsWith('\r') ? line.slice(0, -1) : line;
  if (text.length > MAX_LINE_LENGTH) return reject('overlong', `${text.length} characters`);
  for (let i = 0; i < text.length; i++) {
    const c = text.charCodeAt(i);
    if (c < 0x20 || c > 0x7e) return reject('not_text', 'non-printable bytes');
  }
  const bar = text.lastIndexOf('|');
  if (bar < 0 || text.length - bar !== 5) return reject('no_checksum', 'missing |XXXX');
  const payload = text.slice(0, bar);
  const given = hex4(text, bar + 1);
  if (given < 0)
    return reject('no_checksum', `checksum "${text.slice(bar + 1)}" is not 4 hex digits`);
  if (given !== crc16(payload))
    return reject('bad_checksum', `got ${text.slice(bar + 1)}, computed ${crcHex(payload)}`);
  return { payload };
}

/** The six decimal fields of the data frame last decoded by fastDataLine. */
const fields = new Float64Array(6);

/**
 * A well-formed, correctly checksummed data frame in one pass over the line, without slicing,
 * splitting or regular expressions: a rig sends dozens a second and a replayed or bursting
 * link thousands. Returns null for anything else, which the general decoder then accepts or
 * rejects exactly as it would have. The fields are read in one loop with the position in a
 * local variable (kept in a register, where one shared with a helper goes through memory).
 */
function fastDataLine(line: string, adcMax: number): DataFrame | null {
  let end = line.length;
  if (end > 0 && line.charCodeAt(end - 1) === 13) end--;
  if (end > MAX_LINE_LENGTH) return null;
  // The payload ends at the last '|', which must be followed by exactly four hex digits.
  const bar = end - 5;
  if (
    bar < 2 ||
    line.charCodeAt(bar) !== 124 ||
    line.charCodeAt(0) !== 68 ||
    line.charCodeAt(1) !== 44
  )
    return null;
  const crc = crc16Printable(line, bar);
  if (crc < 0 || hex4(line, bar + 1) !== crc) return null;
  // Channel, seq, tick, then the three counts: each "0" or up to ten digits without a leading
  // zero, at most its maximum, ending in a comma before the flags.
  let i = 2;
  for (let k = 0; k < 6; k++) {
    const max = k === 0 ? 15 : k === 1 ? 65535 : k === 2 ? 0xffffffff : adcMax;
    const at = i;
    let v = 0;
    for (; i < bar; i++) {
      const c = line.charCodeAt(i);
      if (c === 44) break;
      if (c < 48 || c > 57) return null;
      v = v * 10 + (c - 48);
    }
    const length = i - at;
    if (
      length === 0 ||
      length > 10 ||
      (length > 1 && line.charCodeAt(at) === 48) ||
      v > max ||
      i === bar
    )
      return null;
    fields[k] = v;
    i++;
  }
  const rest = bar - i;
  if (rest < 1 || rest > 2) return null;
  const hi = rest === 2 ? hexDigit(line.charCodeAt(i)) : 0;
  const lo = hexDigit(line.charCodeAt(bar - 1));
  if (hi < 0 || lo < 0) return null;
  return {
    kind: 'data',
    channel: fields[0]!,
    seq: fields[1]!,
    tickMs: fields[2]!,
    vRaw: fields[3]!,
    iRaw: fields[4]!,
    tRaw: fields[5]!,
    flags: hi * 16 + lo,
  };
}

function hexDigit(c: number): number {
  return c >= 48 && c <= 57
    ? c - 48
    : c >= 65 && c <= 70
      ? c - 55
      : c >= 97 && c <= 102
        ? c - 87
        : -1;
}

/** The top count of an ADC of 0 to 53 bits: a power worked out per line cost a sixth of decoding it. */
const ADC_MAX = Array.from({ length: 54 }, (_, bits) => 2 ** bits - 1);

/** Decodes one rig line (without its `\n`). Never throws. */
export function decodeRigLine(line: string, adcBits = 16): DecodeResult {
  const adcMax = ADC_MAX[adcBits] ?? 2 ** adcBits - 1;
  const fast = fastDataLine(line, adcMax);
  if (fast) return { ok: true, message: fast };
  const checked = checkFrame(line);
  if ('ok' in checked) return checked;
  const f = checked.payload.split(',');
  switch (f[0]) {
    case 'D': {
      if (f.length !== 8)
        return reject('field_count', `data frame has ${f.length} fields, expected 8`);
      const ch = uint(f[1]!, 15);
      const seq = uint(f[2]!, 65535);
      const tick = uint(f[3]!, 0xffffffff);
      const v = uint(f[4]!, adcMax);
      const i = uint(f[5]!, adcMax);
      const t = uint(f[6]!, adcMax);
      const nums = [ch, seq, tick, v, i, t];
      if (nums.some((n) => n === null) || !HEX_FLAGS.test(f[7]!))
        return reject('not_numeric', checked.payload);
      if (nums.some((n) => n === -1)) return reject('out_of_range', checked.payload);
      return {
        ok: true,
        message: {
          kind: 'data',
          channel: ch!,
          seq: seq!,
          tickMs: tick!,
          vRaw: v!,
          iRaw: i!,
          tRaw: t!,
          flags: parseInt(f[7]!, 16),
        },
      };
    }
    case 'H': {
      if (f.length !== 5) return reject('field_count', `hello has ${f.length} fields, expected 5`);
      const bits = uint(f[3]!, 24);
      const channels = uint(f[4]!, 16);
      if (bits === null || channels === null) return reject('not_numeric', checked.payload);
      if (bits < 1 || channels < 1) return reject('out_of_range', checked.payload);
      return {
        ok: true,
        message: { kind: 'hello', rigId: f[1]!, firmware: f[2]!, adcBits: bits, channels },
      };
    }
    case 'A':
      if (f.length < 2) return reject('field_count', 'acknowledgement without a command');
      return { ok: true, message: { kind: 'ack', command: f[1]!, args: f.slice(2) } };
    case 'E':
      if (f.length < 3)
        return reject('field_count', `rig error has ${f.length} fields, expected 3 or more`);
      return { ok: true, message: { kind: 'rig-error', code: f[1]!, text: f.slice(2).join(',') } };
    default:
      return reject('unknown_type', `line type "${(f[0] ?? '').slice(0, 8)}"`);
  }
}

export function encodeCommand(cmd: HostCommand): string {
  switch (cmd.command) {
    case 'LOAD':
      return frameLine(`C,LOAD,${cmd.channel},${cmd.on ? 1 : 0}`);
    case 'HELLO':
      return frameLine('C,HELLO');
    case 'BEAT':
      return frameLine('C,BEAT');
  }
}

/** Decodes a host command line; used by the simulated rig, which speaks the protocol too. */
export function decodeHostLine(line: string): HostCommand | { error: string } {
  const checked = checkFrame(line);
  if ('ok' in checked) return { error: checked.ok ? 'unexpected' : checked.reason };
  const f = checked.payload.split(',');
  if (f[0] !== 'C') return { error: 'unknown_type' };
  if (f[1] === 'HELLO' && f.length === 2) return { command: 'HELLO' };
  if (f[1] === 'BEAT' && f.length === 2) return { command: 'BEAT' };
  if (f[1] === 'LOAD' && f.length === 4) {
    const ch = uint(f[2]!, 15);
    if (ch === null || ch < 0 || (f[3] !== '0' && f[3] !== '1')) return { error: 'out_of_range' };
    return { command: 'LOAD', channel: ch, on: f[3] === '1' };
  }
  return { error: 'field_count' };
}

/** Encodes a rig-to-host data frame; the simulated rig and test tools speak the protocol too. */
export function encodeDataFrame(f: Omit<import('./messages.js').DataFrame, 'kind'>): string {
  const flags = f.flags.toString(16).toUpperCase().padStart(2, '0');
  return frameLine(`D,${f.channel},${f.seq},${f.tickMs},${f.vRaw},${f.iRaw},${f.tRaw},${flags}`);
}
