import { crc16, crcHex } from './crc16.js';
import type { DecodeResult, HostCommand, RejectReason } from './messages.js';

/** Longest line accepted; a data frame at its widest is about 60 characters. */
export const MAX_LINE_LENGTH = 200;

const DEC = /^(0|[1-9][0-9]{0,9})$/;
const HEX_FLAGS = /^[0-9A-Fa-f]{1,2}$/;
const PRINTABLE = /^[\x20-\x7e]*$/;

function reject(reason: RejectReason, detail: string): DecodeResult {
  return { ok: false, reason, detail };
}

function uint(field: string, max: number): number | null {
  if (!DEC.test(field)) return null;
  const n = Number(field);
  return n <= max ? n : -1;
}

/** Adds `|CRC` to a payload: the one way lines are framed, both directions. */
export function frameLine(payload: string): string {
  return `${payload}|${crcHex(payload)}\n`;
}

/** Strips the checksum and verifies it; returns the payload or a reject reason. */
function checkFrame(line: string): { payload: string } | DecodeResult {
  const text = line.endsWith('\r') ? line.slice(0, -1) : line;
  if (text.length > MAX_LINE_LENGTH) return reject('overlong', `${text.length} characters`);
  if (!PRINTABLE.test(text)) return reject('not_text', 'non-printable bytes');
  const bar = text.lastIndexOf('|');
  if (bar < 0 || text.length - bar !== 5) return reject('no_checksum', 'missing |XXXX');
  const payload = text.slice(0, bar);
  const given = text.slice(bar + 1);
  if (!/^[0-9A-Fa-f]{4}$/.test(given)) return reject('no_checksum', `checksum "${given}" is not 4 hex digits`);
  const want = crc16(payload);
  if (parseInt(given, 16) !== want) return reject('bad_checksum', `got ${given}, computed ${crcHex(payload)}`);
  return { payload };
}

/** Decodes one rig line (without its `\n`). Never throws. */
export function decodeRigLine(line: string, adcBits = 16): DecodeResult {
  const checked = checkFrame(line);
  if ('ok' in checked) return checked;
  const f = checked.payload.split(',');
  const adcMax = 2 ** adcBits - 1;
  switch (f[0]) {
    case 'D': {
      if (f.length !== 8) return reject('field_count', `data frame has ${f.length} fields, expected 8`);
      const ch = uint(f[1]!, 15);
      const seq = uint(f[2]!, 65535);
      const tick = uint(f[3]!, 0xffffffff);
      const v = uint(f[4]!, adcMax);
      const i = uint(f[5]!, adcMax);
      const t = uint(f[6]!, adcMax);
      const nums = [ch, seq, tick, v, i, t];
      if (nums.some((n) => n === null) || !HEX_FLAGS.test(f[7]!)) return reject('not_numeric', checked.payload);
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
      return { ok: true, message: { kind: 'hello', rigId: f[1]!, firmware: f[2]!, adcBits: bits, channels } };
    }
    case 'A':
      if (f.length < 2) return reject('field_count', 'acknowledgement without a command');
      return { ok: true, message: { kind: 'ack', command: f[1]!, args: f.slice(2) } };
    case 'E':
      if (f.length < 3) return reject('field_count', `rig error has ${f.length} fields, expected 3 or more`);
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
