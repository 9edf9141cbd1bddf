import { describe, expect, it } from 'vitest';
import {
  MAX_LINE_LENGTH,
  decodeHostLine,
  decodeRigLine,
  encodeCommand,
  encodeDataFrame,
  frameLine,
} from '../../src/protocol/codec.js';
import type { DataFrame, HostCommand, RejectReason } from '../../src/protocol/messages.js';
import { ibm3740, referenceLine } from './reference-crc.js';

// Every line here is framed with the test's own bit-by-bit CRC-16/IBM-3740 model (source: CRC
// RevEng catalogue), so a valid decode also checks the product's checksum against it.

function reason(line: string, adcBits?: number): RejectReason | 'accepted' {
  const r = decodeRigLine(line, adcBits);
  return r.ok ? 'accepted' : r.reason;
}

function data(line: string, adcBits?: number): DataFrame {
  const r = decodeRigLine(line, adcBits);
  if (!r.ok) throw new Error(`rejected ${r.reason}: ${r.detail}`);
  if (r.message.kind !== 'data') throw new Error(`not a data frame: ${r.message.kind}`);
  return r.message;
}

const d = (fields: (string | number)[]): string => referenceLine(['D', ...fields].join(','));

describe('codec: valid rig lines decode', () => {
  it('a data frame', () => {
    expect(data(d([3, 1234, 987654, 2048, 1500, 3100, '01']), 12)).toEqual({
      kind: 'data',
      channel: 3,
      seq: 1234,
      tickMs: 987654,
      vRaw: 2048,
      iRaw: 1500,
      tRaw: 3100,
      flags: 1,
    });
  });

  it('a hello, an acknowledgement and a rig error', () => {
    expect(decodeRigLine(referenceLine('H,bench-a,1.4.2,12,2'))).toEqual({
      ok: true,
      message: { kind: 'hello', rigId: 'bench-a', firmware: '1.4.2', adcBits: 12, channels: 2 },
    });
    expect(decodeRigLine(referenceLine('A,LOAD,0,1'))).toEqual({
      ok: true,
      message: { kind: 'ack', command: 'LOAD', args: ['0', '1'] },
    });
    expect(decodeRigLine(referenceLine('A,BEAT'))).toEqual({
      ok: true,
      message: { kind: 'ack', command: 'BEAT', args: [] },
    });
    expect(decodeRigLine(referenceLine('E,7,watchdog cut the load, no heartbeat'))).toEqual({
      ok: true,
      message: { kind: 'rig-error', code: '7', text: 'watchdog cut the load, no heartbeat' },
    });
  });

  it('upper- and lower-case hex checksums both decode (protocol v1)', () => {
    const payload = 'D,0,42,1000,1,2,3,0';
    // pick a payload whose CRC has letters in it so the case actually differs
    expect(ibm3740(payload).toString(16)).toMatch(/[a-f]/);
    expect(data(referenceLine(payload, false))).toEqual(data(referenceLine(payload, true)));
  });

  it('a trailing \\r is tolerated, a second one is not', () => {
    const line = d([0, 1, 2, 3, 4, 5, '00']);
    expect(data(`${line}\r`)).toEqual(data(line));
    expect(reason(`${line}\r\r`)).toBe('not_text');
  });

  it('the widest values in range are accepted: ch 15, seq 65535, tick 2^32 - 1, counts 2^bits - 1', () => {
    const f = data(d([15, 65535, 4294967295, 4095, 4095, 4095, 'FF']), 12);
    expect([f.channel, f.seq, f.tickMs, f.vRaw, f.iRaw, f.tRaw, f.flags]).toEqual([
      15,
      65535,
      2 ** 32 - 1,
      4095,
      4095,
      4095,
      255,
    ]);
    expect(data(d([0, 0, 0, 65535, 0, 0, '0'])).vRaw).toBe(65535); // default: 16-bit counts
  });

  it('flags: bit 0 load on, bit 1 rig fault; reserved bits 2-7 are passed through, not rejected', () => {
    expect(data(d([0, 0, 0, 0, 0, 0, '3'])).flags).toBe(0b11);
    expect(data(d([0, 0, 0, 0, 0, 0, 'fc'])).flags).toBe(0xfc);
  });

  it('a line of exactly MAX_LINE_LENGTH characters is accepted', () => {
    const head = 'E,1,';
    const text = 'x'.repeat(MAX_LINE_LENGTH - head.length - 5);
    const line = referenceLine(head + text);
    expect(line).toHaveLength(MAX_LINE_LENGTH);
    expect(reason(line)).toBe('accepted');
  });
});

describe('codec: every reject reason is classified', () => {
  const good = d([1, 2, 3, 4, 5, 6, '01']);

  it.each<[string, string, RejectReason]>([
    ['checksum off by one', good.slice(0, -1) + (good.endsWith('0') ? '1' : '0'), 'bad_checksum'],
    ['one payload character changed', good.replace('D,1,', 'D,2,'), 'bad_checksum'],
    ['no checksum', 'D,1,2,3,4,5,6,01', 'no_checksum'],
    ['checksum of three digits', good.slice(0, -1), 'no_checksum'],
    ['checksum not hex', good.slice(0, -4) + 'GHIJ', 'no_checksum'],
    ['empty line', '', 'no_checksum'],
    ['unknown line type', referenceLine('X,1,2'), 'unknown_type'],
    ['data frame with 7 fields', d([1, 2, 3, 4, 5, 6]), 'field_count'],
    ['data frame with 9 fields', d([1, 2, 3, 4, 5, 6, '01', 7]), 'field_count'],
    ['hello with 4 fields', referenceLine('H,rig,1.0,12'), 'field_count'],
    ['ack without a command', referenceLine('A'), 'field_count'],
    ['rig error without text', referenceLine('E,7'), 'field_count'],
    ['letters in a count', d([1, 2, 3, 'x', 5, 6, '01']), 'not_numeric'],
    ['negative count', d([1, 2, 3, -4, 5, 6, '01']), 'not_numeric'],
    ['decimal point', d([1, 2, 3, 4.5, 5, 6, '01']), 'not_numeric'],
    ['empty field', d([1, 2, 3, '', 5, 6, '01']), 'not_numeric'],
    ['leading zero', d([1, '02', 3, 4, 5, 6, '01']), 'not_numeric'],
    ['leading plus', d(['+1', 2, 3, 4, 5, 6, '01']), 'not_numeric'],
    ['space in a field', d([1, ' 2', 3, 4, 5, 6, '01']), 'not_numeric'],
    ['flags not hex', d([1, 2, 3, 4, 5, 6, 'G1']), 'not_numeric'],
    ['flags of three digits', d([1, 2, 3, 4, 5, 6, '001']), 'not_numeric'],
    ['hello with non-numeric bits', referenceLine('H,rig,1.0,twelve,1'), 'not_numeric'],
    ['channel 16', d([16, 2, 3, 4, 5, 6, '01']), 'out_of_range'],
    ['seq 65536', d([1, 65536, 3, 4, 5, 6, '01']), 'out_of_range'],
    ['tick 2^32', d([1, 2, 4294967296, 4, 5, 6, '01']), 'out_of_range'],
    ['tick of ten nines', d([1, 2, 9999999999, 4, 5, 6, '01']), 'out_of_range'],
    ['hello with 0 ADC bits', referenceLine('H,rig,1.0,0,1'), 'out_of_range'],
    ['hello with 25 ADC bits', referenceLine('H,rig,1.0,25,1'), 'out_of_range'],
    ['hello with 0 channels', referenceLine('H,rig,1.0,12,0'), 'out_of_range'],
    ['hello with 17 channels', referenceLine('H,rig,1.0,12,17'), 'out_of_range'],
    ['binary noise', '\x00\x01\xfe\xff|0000', 'not_text'],
    ['a byte above 0x7e', referenceLine('E,1,caf\xe9'), 'not_text'],
    ['a tab', referenceLine('E,1,a\tb'), 'not_text'],
    ['overlong', referenceLine('E,1,' + 'x'.repeat(MAX_LINE_LENGTH)), 'overlong'],
  ])('%s -> %s', (_name, line, want) => {
    expect(reason(line)).toBe(want);
  });

  it.each(['v', 'i', 't'])('a raw %s count of 2^adcBits is out of range', (which) => {
    const counts = { v: 100, i: 100, t: 100, [which]: 4096 };
    expect(reason(d([0, 0, 0, counts.v, counts.i, counts.t, '01']), 12)).toBe('out_of_range');
    expect(reason(d([0, 0, 0, counts.v, counts.i, counts.t, '01']), 13)).toBe('accepted');
  });

  it('never throws, and gives a detail for every reject', () => {
    for (const line of ['|', '||||', 'D|', ',,,,,,,|0000', '\uffff\u1234', 'D,'.repeat(300)]) {
      const r = decodeRigLine(line);
      expect(r.ok).toBe(false);
      if (!r.ok) expect(r.detail.length).toBeGreaterThan(0);
    }
  });
});

describe('codec: host commands', () => {
  const commands: HostCommand[] = [
    { command: 'HELLO' },
    { command: 'BEAT' },
    ...Array.from({ length: 16 }, (_, ch) => [
      { command: 'LOAD' as const, channel: ch, on: true },
      { command: 'LOAD' as const, channel: ch, on: false },
    ]).flat(),
  ];

  it('encodes the lines the protocol document shows, checksummed with the reference CRC', () => {
    expect(encodeCommand({ command: 'LOAD', channel: 2, on: true })).toBe(
      `${referenceLine('C,LOAD,2,1')}\n`,
    );
    expect(encodeCommand({ command: 'LOAD', channel: 0, on: false })).toBe(
      `${referenceLine('C,LOAD,0,0')}\n`,
    );
    expect(encodeCommand({ command: 'HELLO' })).toBe(`${referenceLine('C,HELLO')}\n`);
    expect(encodeCommand({ command: 'BEAT' })).toBe(`${referenceLine('C,BEAT')}\n`);
  });

  it.each(commands)('the rig side decodes what the host encodes: %o', (cmd) => {
    const line = encodeCommand(cmd);
    expect(line.endsWith('\n')).toBe(true);
    expect(decodeHostLine(line.slice(0, -1))).toEqual(cmd);
    expect(decodeHostLine(line.slice(0, -1) + '\r')).toEqual(cmd);
  });

  it('the rig side rejects damaged or malformed commands', () => {
    const good = encodeCommand({ command: 'LOAD', channel: 1, on: true }).trimEnd();
    expect(decodeHostLine(good.replace('LOAD,1', 'LOAD,3'))).toEqual({ error: 'bad_checksum' });
    expect(decodeHostLine(referenceLine('C,LOAD,16,1'))).toEqual({ error: 'out_of_range' });
    expect(decodeHostLine(referenceLine('C,LOAD,1,2'))).toEqual({ error: 'out_of_range' });
    expect(decodeHostLine(referenceLine('C,LOAD,1'))).toEqual({ error: 'field_count' });
    expect(decodeHostLine(referenceLine('D,LOAD,1,1'))).toEqual({ error: 'unknown_type' });
  });

  it('frameLine appends |CRC and a newline', () => {
    expect(frameLine('123456789')).toBe('123456789|29B1\n'); // check value, CRC RevEng catalogue
  });

  it('encodeDataFrame round-trips through decodeRigLine', () => {
    const f = {
      channel: 15,
      seq: 65535,
      tickMs: 2 ** 32 - 1,
      vRaw: 4095,
      iRaw: 0,
      tRaw: 17,
      flags: 0x02,
    };
    const line = encodeDataFrame(f);
    expect(line).toBe(`${referenceLine('D,15,65535,4294967295,4095,0,17,02')}\n`);
    expect(data(line.trimEnd(), 12)).toEqual({ kind: 'data', ...f });
  });
});
