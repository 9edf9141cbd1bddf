import { SerialPort } from 'serialport';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { decodeRigLine, encodeCommand } from '../../src/protocol/codec.js';
import type { DataFrame } from '../../src/protocol/messages.js';
import { ibm3740, referenceLine } from '../protocol/reference-crc.js';
import {
  startEmulatedRig,
  waitUntil,
  type EmulatedRig,
  type HarnessTruth,
} from './emulated-rig.js';

interface Heard {
  line: string;
  atMs: number;
}

// The firmware on the emulated chip, spoken to directly over its pseudo-terminal at the rig
// profile's 250 000 baud: what protocol v1 says a rig must answer.
describe('reference firmware on an emulated ATmega328P: protocol v1', () => {
  let rig: EmulatedRig;
  let port: SerialPort;
  const heard: Heard[] = [];
  let t0 = 0;
  let truth: HarnessTruth;

  const linesFrom = (from: number): string[] => heard.slice(from).map((h) => h.line);
  const send = (text: string): void => {
    port.write(text);
  };
  const awaitLine = async (from: number, pattern: RegExp, what: string): Promise<string> => {
    await waitUntil(() => linesFrom(from).some((l) => pattern.test(l)), 3000, what);
    return linesFrom(from).find((l) => pattern.test(l))!;
  };

  beforeAll(async () => {
    rig = await startEmulatedRig({ hold: true, seed: 3 });
    port = new SerialPort({ path: rig.port, baudRate: 250000, autoOpen: false });
    await new Promise<void>((res, rej) => port.open((e) => (e ? rej(e) : res())));
    let rest = '';
    t0 = Date.now();
    port.on('data', (d: Buffer) => {
      rest += d.toString('latin1');
      const parts = rest.split('\n');
      rest = parts.pop()!;
      for (const line of parts) heard.push({ line, atMs: Date.now() - t0 });
    });
    // The chip is held in reset until this first byte: its boot hello then reaches us.
    send(encodeCommand({ command: 'HELLO' }));
    await waitUntil(() => heard.length >= 40, 10_000, 'two seconds of frames');
    // Channel 1's load on, and then no heartbeat: the rig must cut it 5 s later by itself.
    send(encodeCommand({ command: 'LOAD', channel: 1, on: true }));
    await awaitLine(0, /^A,LOAD,1,1\|/, 'the acknowledgement');
    await waitUntil(
      () => rig.truth().channels[1].segments.length >= 3,
      9000,
      'the rig to cut the load by itself',
    );
    await new Promise((r) => setTimeout(r, 500));
    truth = rig.truth();
  }, 30_000);

  afterAll(async () => {
    if (port?.isOpen) await new Promise<void>((r) => port.close(() => r()));
    await rig?.stop();
  });

  it('every line carries a valid CRC-16/IBM-3740 (CRC catalogue: poly 0x1021, init 0xFFFF, check 0x29B1)', () => {
    expect(ibm3740('123456789')).toBe(0x29b1);
    const lines = heard.map((h) => h.line);
    expect(lines.length).toBeGreaterThan(100);
    for (const line of lines) {
      const bar = line.lastIndexOf('|');
      expect(line, line).toBe(referenceLine(line.slice(0, bar)));
      expect(decodeRigLine(line, 12).ok, line).toBe(true);
    }
  });

  it('drives both load pins low within the first instructions after power-on (3-cycle jump, 2 cycles per cbi/sbi: ATmega328P instruction set, from memory)', () => {
    expect(truth.boot_pins_driven_after_cycles).toBeGreaterThan(0);
    expect(truth.boot_pins_driven_after_cycles).toBeLessThanOrEqual(11);
  });

  it('says hello at boot and when asked: 12-bit counts, two channels', () => {
    const hellos = heard.filter((h) => h.line.startsWith('H,'));
    expect(hellos.length).toBeGreaterThanOrEqual(2);
    expect(hellos[0]!.line).toMatch(/^H,cv328,1\.0\.0,12,2\|/);
    // A power-on is not reported as an error.
    expect(heard.some((h) => h.line.startsWith('E,RST_'))).toBe(false);
  });

  it('sends ten frames a second on each channel, 100 ms apart on its own clock, and one more at once after a switch', () => {
    for (const ch of [0, 1]) {
      const frames = heard
        .map((h) => decodeRigLine(h.line, 12))
        .flatMap((d) => (d.ok && d.message.kind === 'data' ? [d.message] : []))
        .filter((f) => f.channel === ch);
      expect(frames.length).toBeGreaterThan(50);
      for (let k = 1; k < frames.length; k++)
        expect(frames[k]!.seq).toBe((frames[k - 1]!.seq + 1) & 0xffff);
      const phase = frames[0]!.tickMs % 100;
      const regular = frames.filter((f) => f.tickMs % 100 === phase);
      // On the 100 ms grid of its own clock; a slot may be skipped when the link backs up (the
      // host reading slowly under load blocks the UART), never shifted.
      const gaps = regular.slice(1).map((f, k) => f.tickMs - regular[k]!.tickMs);
      for (const g of gaps) expect(g > 0 && g % 100 === 0, `gap ${g} ms`).toBe(true);
      expect(gaps.filter((g) => g === 100).length).toBeGreaterThanOrEqual(gaps.length - 2);
      // Channel 1 switched twice (on by the host, off by the heartbeat watchdog).
      const extra = frames.filter((f) => f.tickMs % 100 !== phase);
      expect(extra.map((f) => f.flags)).toEqual(ch === 1 ? [0x01, 0x02] : []);
    }
  });

  it('reports 12-bit counts: within 1.5 % of the true cell voltage through the nominal chain, with the resolution of oversampling (AVR121 method, from memory)', () => {
    const off = heard
      .map((h) => decodeRigLine(h.line, 12))
      .flatMap((d) => (d.ok && d.message.kind === 'data' ? [d.message] : []))
      .filter((f) => f.channel === 0 && f.flags === 0);
    const counts = off.map((f) => f.vRaw);
    const mean = counts.reduce((a, b) => a + b, 0) / counts.length;
    // Nominal chain of the rig profile: 5.000 V over 4096 counts, divider 10k/10k.
    const volts = ((mean * 5) / 4096) * 2;
    expect(Math.abs(volts / truth.channels[0].terminal_V - 1)).toBeLessThan(0.015);
    // A 10-bit reading shifted left would only give multiples of 4.
    expect(new Set(counts.map((c) => c % 4)).size).toBeGreaterThan(2);
  });

  it('cuts the load 5 s after the last sign of the host and says so: flag bit 1 and an E line (protocol v1)', () => {
    const [, on, off] = truth.channels[1].segments;
    expect(on!.load).toBe(true);
    expect(off!.load).toBe(false);
    // Emulated time. The command was the host's last word: its bytes reach the chip at 250 000
    // baud, the pin rises once the line is complete and the frame being sent has gone out (a
    // host reading slowly under load can hold that frame a few milliseconds).
    const heardAt = truth.link.last_host_byte_ms;
    expect(on!.from_ms - heardAt).toBeGreaterThan(0);
    expect(on!.from_ms - heardAt).toBeLessThan(10);
    expect(off!.from_ms - on!.from_ms).toBeGreaterThanOrEqual(5000);
    expect(off!.from_ms - on!.from_ms).toBeLessThan(5002);
    expect(heard.some((h) => /^E,BEAT_LOST,/.test(h.line))).toBe(true);
    const last = heard
      .map((h) => decodeRigLine(h.line, 12))
      .flatMap((d) => (d.ok && d.message.kind === 'data' ? [d.message] : []))
      .filter((f: DataFrame) => f.channel === 1)
      .at(-1)!;
    expect(last.flags).toBe(0x02);
  });

  it('answers bad commands with E lines and keeps working', async () => {
    const cases: [string, RegExp][] = [
      ['C,LOAD,0,1|0000\n', /^E,CRC,/],
      ['C,LOAD,0,1\n', /^E,CRC,/],
      [`${referenceLine('C,FLASH')}\n`, /^E,SYNTAX,/],
      [`${referenceLine('C,LOAD,0,2')}\n`, /^E,RANGE,/],
      [`${referenceLine('C,LOAD,16,1')}\n`, /^E,RANGE,/],
      [`${referenceLine('C,LOAD,3,1')}\n`, /^E,CHANNEL,/],
      [`${'C,BEAT,'.repeat(20)}\n`, /^E,OVERLONG,/],
    ];
    for (const [text, answer] of cases) {
      const from = heard.length;
      send(text);
      await awaitLine(from, /^[AE],/, `an answer to ${JSON.stringify(text)}`);
      expect(
        linesFrom(from).find((l) => /^[AE],/.test(l)),
        text,
      ).toMatch(answer);
    }
    // None of them switched anything; a good command still works.
    expect(rig.truth().channels[0].load_on).toBe(false);
    const from = heard.length;
    send(encodeCommand({ command: 'HELLO' }));
    await awaitLine(from, /^H,/, 'a hello after the bad commands');
  });
});
