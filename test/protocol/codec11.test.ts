import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import {
  HelloExchange,
  encodeCommand11,
  encodeForRig,
  refusal,
  type Rig11,
  type RigCapabilities,
} from '../../src/protocol/capabilities.js';
import { decodeHostLine, decodeRigLine, encodeCommand } from '../../src/protocol/codec.js';
import { decodeHostLine11, decodeRigLine11, encodeCapability } from '../../src/protocol/codec11.js';
import { frameState } from '../../src/protocol/frame-state.js';
import type { CapabilityFrame } from '../../src/protocol/messages.js';
import { referenceLine } from './reference-crc.js';

// Protocol 1.1 as docs/protocol.md writes it. Every line is framed with the test's own
// bit-by-bit CRC-16/IBM-3740 model (source: CRC RevEng catalogue), as v1's tests do.

const k = (payload: string): string => referenceLine(`K,${payload}`);

function capability(line: string, adcBits = 12): CapabilityFrame {
  const r = decodeRigLine11(line, adcBits);
  if (!r.ok) throw new Error(`rejected ${r.reason}: ${r.detail}`);
  if (r.message.kind !== 'capability') throw new Error(`not a K line: ${r.message.kind}`);
  return r.message;
}

const reason = (line: string): string => {
  const r = decodeRigLine11(line, 12);
  return r.ok ? 'accepted' : r.reason;
};

const cc: Rig11 = {
  protocol: '1.1',
  rigId: 'cv328cc',
  channels: [
    {
      channel: 0,
      load: 'constant_current',
      iMinRaw: 20,
      iMaxRaw: 3000,
      pMaxRaw: 0,
      charger: true,
    },
    { channel: 1, load: 'switched', iMinRaw: 0, iMaxRaw: 0, pMaxRaw: 0, charger: false },
  ],
};
const v1: RigCapabilities = { protocol: '1.0', rigId: 'cv328', channels: 2 };

describe('protocol 1.1: the capability line', () => {
  it('decodes a constant-current channel with a charger, and a switched one', () => {
    expect(capability(k('0,I,20,3000,0,1'))).toEqual({ kind: 'capability', ...cc.channels[0] });
    expect(capability(k('1,S,0,0,0,0'))).toEqual({ kind: 'capability', ...cc.channels[1] });
    expect(capability(k('2,P,10,4000,3500,0'))).toMatchObject({
      load: 'constant_power',
      pMaxRaw: 3500,
    });
  });

  it('round-trips through its encoder, with the CRC the reference model computes', () => {
    for (const c of cc.channels) {
      const line = encodeCapability(c);
      expect(line.endsWith('\n')).toBe(true);
      expect(line.slice(0, -1)).toBe(referenceLine(line.slice(0, line.lastIndexOf('|'))));
      expect(capability(line.slice(0, -1))).toEqual({ kind: 'capability', ...c });
    }
  });

  it('rejects malformed capability lines with the reason named', () => {
    expect(reason(k('0,I,20,3000,0'))).toBe('field_count');
    expect(reason(k('0,X,20,3000,0,1'))).toBe('not_numeric');
    expect(reason(k('0,I,20,3000,0,2'))).toBe('not_numeric');
    expect(reason(k('0,I,020,3000,0,1'))).toBe('not_numeric');
    expect(reason(k('16,I,20,3000,0,1'))).toBe('out_of_range');
    expect(reason(k('0,I,20,4096,0,1'))).toBe('out_of_range'); // above a 12-bit count
    expect(reason(k('0,I,3000,20,0,1'))).toBe('out_of_range'); // an empty range
    expect(reason(k('0,S,0,100,0,0'))).toBe('out_of_range'); // a switched load has no range
    expect(reason(k('0,I,20,3000,100,0'))).toBe('out_of_range'); // power without P
    expect(reason(k('0,P,20,3000,0,0'))).toBe('out_of_range'); // P without a power range
    const good = k('0,I,20,3000,0,1');
    expect(reason(good.slice(0, -1) + (good.endsWith('0') ? '1' : '0'))).toBe('bad_checksum');
    expect(() => encodeCapability({ ...cc.channels[1]!, iMaxRaw: 5 })).toThrow(/no setpoint range/);
  });

  it('is an unknown line to a v1 decoder, which counts it and goes on', () => {
    const r = decodeRigLine(k('0,I,20,3000,0,1'), 12);
    expect(r.ok ? 'accepted' : r.reason).toBe('unknown_type');
  });

  it('leaves every v1 line decoding exactly as v1 does (property: any 8-field data line)', () => {
    const num = fc.oneof(fc.integer({ min: 0, max: 70000 }).map(String), fc.constant('00'));
    const flags = fc.integer({ min: 0, max: 255 }).map((n) => n.toString(16));
    fc.assert(
      fc.property(fc.array(num, { minLength: 6, maxLength: 6 }), flags, (nums, fl) => {
        const line = referenceLine(['D', ...nums, fl].join(','));
        expect(decodeRigLine11(line, 12)).toEqual(decodeRigLine(line, 12));
      }),
    );
    for (const p of ['H,bench-a,1.0.0,12,2', 'A,LOAD,0,1', 'E,RANGE,channel 0..15', 'X,1'])
      expect(decodeRigLine11(referenceLine(p), 12)).toEqual(decodeRigLine(referenceLine(p), 12));
  });
});

describe('protocol 1.1: host commands and the guard in front of them', () => {
  it('encodes MODE, ISET and PSET as the grammar says, with the reference CRC', () => {
    const line = (s: string): string => `${referenceLine(s)}\n`;
    expect(encodeForRig(cc, { command: 'MODE', channel: 0, mode: 'charge' })).toBe(
      line('C,MODE,0,C'),
    );
    expect(encodeForRig(cc, { command: 'MODE', channel: 1, mode: 'discharge' })).toBe(
      line('C,MODE,1,D'),
    );
    expect(encodeCommand11(cc, { command: 'MODE', channel: 0, mode: 'rest' })).toBe(
      line('C,MODE,0,R'),
    );
    expect(encodeForRig(cc, { command: 'ISET', channel: 0, raw: 1234 })).toBe(
      line('C,ISET,0,1234'),
    );
    const p: Rig11 = {
      ...cc,
      channels: [{ ...cc.channels[0]!, load: 'constant_power', pMaxRaw: 900 }],
    };
    expect(encodeForRig(p, { command: 'PSET', channel: 0, raw: 900 })).toBe(line('C,PSET,0,900'));
  });

  it('round-trips every 1.1 command through the rig-side decoder; v1 commands decode as v1', () => {
    const cmds = [
      { command: 'MODE', channel: 0, mode: 'charge' },
      { command: 'MODE', channel: 1, mode: 'rest' },
      { command: 'ISET', channel: 0, raw: 20 },
      { command: 'ISET', channel: 0, raw: 3000 },
    ] as const;
    for (const c of cmds) expect(decodeHostLine11(encodeForRig(cc, c).trimEnd())).toEqual(c);
    const load = encodeCommand({ command: 'LOAD', channel: 1, on: true }).trimEnd();
    expect(decodeHostLine11(load)).toEqual(decodeHostLine(load));
    expect(decodeHostLine11(referenceLine('C,MODE,0,X'))).toEqual({ error: 'out_of_range' });
    expect(decodeHostLine11(referenceLine('C,ISET,0,-5'))).toEqual({ error: 'out_of_range' });
    expect(decodeHostLine11(referenceLine('C,ISET,0'))).toEqual({ error: 'field_count' });
  });

  it('never lets a 1.1 command reach a v1 rig: CV_RIG_INCAPABLE, exit code 2', () => {
    for (const c of [
      { command: 'MODE', channel: 0, mode: 'rest' },
      { command: 'ISET', channel: 0, raw: 100 },
      { command: 'PSET', channel: 0, raw: 100 },
    ] as const) {
      expect(() => encodeForRig(v1, c)).toThrow(/speaks protocol v1 only/);
      expect(refusal(v1, c)).toMatchObject({ code: 'CV_RIG_INCAPABLE', exitCode: 2 });
    }
    expect(encodeForRig(v1, { command: 'LOAD', channel: 1, on: true })).toBe(
      encodeCommand({ command: 'LOAD', channel: 1, on: true }),
    );
  });

  it('refuses what the channel did not declare: a charge without a charger, a setpoint out of range, power', () => {
    const refused = (c: Parameters<typeof refusal>[1]): string => refusal(cc, c)?.message ?? 'sent';
    expect(refused({ command: 'MODE', channel: 1, mode: 'charge' })).toMatch(/has no charger/);
    expect(refused({ command: 'ISET', channel: 1, raw: 100 })).toMatch(/switched load only/);
    expect(refused({ command: 'ISET', channel: 0, raw: 19 })).toMatch(/outside the 20..3000/);
    expect(refused({ command: 'ISET', channel: 0, raw: 3001 })).toMatch(/outside/);
    expect(refused({ command: 'PSET', channel: 0, raw: 10 })).toMatch(/no constant power/);
    expect(refused({ command: 'MODE', channel: 2, mode: 'rest' })).toMatch(/no channel 2/);
    expect(refused({ command: 'ISET', channel: 0, raw: 20 })).toBe('sent');
  });
});

describe('protocol 1.1: the hello exchange', () => {
  const ok = (line: string): ReturnType<typeof decodeRigLine11> => decodeRigLine11(line, 12);
  const H = referenceLine('H,cv328cc,1.1.0,12,2');

  it('a hello followed by anything but K lines is a v1 rig', () => {
    const x = new HelloExchange();
    expect(x.feed(ok(referenceLine('D,0,0,100,1,2,3,00')))).toBeNull(); // before any hello
    expect(x.feed(ok(H))).toBeNull();
    expect(x.feed(ok(referenceLine('D,0,1,200,1,2,3,00')))).toEqual({
      protocol: '1.0',
      rigId: 'cv328cc',
      channels: 2,
    });
  });

  it('a hello followed by one K line per channel is a 1.1 rig, in channel order', () => {
    const x = new HelloExchange();
    x.feed(ok(H));
    expect(x.feed(ok(k('1,S,0,0,0,0')))).toBeNull();
    expect(x.feed(ok(k('0,I,20,3000,0,1')))).toEqual(cc);
  });

  it('a damaged, short or contradictory exchange is an error: CV_RIG_CAPABILITIES', () => {
    const run = (lines: string[]): unknown => {
      const x = new HelloExchange();
      let last: unknown = null;
      for (const l of [H, ...lines]) last = x.feed(ok(l)) ?? last;
      return last;
    };
    const code = { code: 'CV_RIG_CAPABILITIES' };
    expect(run([k('0,I,20,3000,0,1'), referenceLine('D,0,1,200,1,2,3,05')])).toMatchObject(code);
    expect(run([k('0,I,20,3000,0,1'), k('0,I,20,3000,0,1')])).toMatchObject(code);
    expect(run([k('2,I,20,3000,0,1')])).toMatchObject(code);
    expect(run([k('0,I,20,3000,0,1'), 'K,1,S,0,0,0,0|0000'])).toMatchObject(code);
  });
});

describe('protocol 1.1: data-frame flags', () => {
  it('reads v1 flags exactly as v1 means them', () => {
    expect(frameState(0x00)).toMatchObject({ mode: 'rest', regulation: null, rigFault: false });
    expect(frameState(0x01)).toMatchObject({ mode: 'discharge', regulation: 'switched' });
    expect(frameState(0x02)).toMatchObject({ mode: 'rest', rigFault: true });
    expect(frameState(0xc1)).toMatchObject({ mode: 'discharge', regulation: 'switched' });
  });

  it('reads the 1.1 mode, direction and trim bits', () => {
    expect(frameState(0x05)).toMatchObject({
      mode: 'discharge',
      regulation: 'constant_current',
      direction: 'out_of_cell',
      setpointNotHeld: false,
    });
    expect(frameState(0x25)).toMatchObject({
      regulation: 'constant_current',
      setpointNotHeld: true,
    });
    expect(frameState(0x0d)).toMatchObject({ regulation: 'constant_power' });
    expect(frameState(0x18)).toMatchObject({
      mode: 'charge',
      regulation: 'charger',
      direction: 'into_cell',
    });
  });

  it('refuses combinations that cannot be true, a load and a charger together first', () => {
    expect(frameState(0x19)).toEqual({ invalid: 'load and charger reported on together' });
    expect(frameState(0x08)).toHaveProperty('invalid');
    expect(frameState(0x11)).toHaveProperty('invalid');
    expect(frameState(0x04)).toHaveProperty('invalid');
    expect(frameState(0x21)).toHaveProperty('invalid');
  });
});

describe('protocol 1.1: robustness', () => {
  it('never throws on any printable line, and accepts a K line only in canonical form (property)', () => {
    const field = fc.oneof(
      fc.constantFrom('K', 'I', 'S', 'P', '0', '1', '24', '3000', '', '00', '-1', '4096'),
      fc.string({ maxLength: 6 }),
    );
    fc.assert(
      fc.property(fc.array(field, { minLength: 1, maxLength: 9 }), (fields) => {
        const line = referenceLine(['K', ...fields].join(','));
        const r = decodeRigLine11(line, 12);
        if (r.ok && r.message.kind === 'capability')
          expect(encodeCapability(r.message).trimEnd()).toBe(line);
      }),
      { numRuns: 3000 },
    );
  });
});
