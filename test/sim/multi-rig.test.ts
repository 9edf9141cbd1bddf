import { describe, expect, it } from 'vitest';
import { VirtualClock } from '../../src/core/clock.js';
import { decodeRigLine } from '../../src/protocol/codec.js';
import {
  FLAG_LOAD_ON,
  FLAG_RIG_FAULT,
  type DataFrame,
  type RigMessage,
} from '../../src/protocol/messages.js';
import type { SimChannelOptions } from '../../src/sim/sim-channel.js';
import { SimRig, WATCHDOG_MS } from '../../src/sim/sim-rig.js';
import {
  buildMultiChannelRig,
  buildSimRig,
  loadScenarios,
  pickRigScenario,
  pickScenario,
} from '../../src/sim/scenarios.js';
import { BENCH_PROFILE, harness, IdealSource, SCENARIO_FILE } from './helpers.js';

function decoded(lines: string[]): RigMessage[] {
  return lines.map((l) => {
    const r = decodeRigLine(l, 12);
    if (!r.ok) throw new Error(`rejected ${r.reason}: ${JSON.stringify(l)}`);
    return r.message;
  });
}
const dataOf = (m: RigMessage[], ch: number) =>
  m.filter((x): x is DataFrame => x.kind === 'data' && x.channel === ch);

function channel(n: number, over: Partial<SimChannelOptions> = {}): SimChannelOptions {
  return {
    channel: n,
    cell: new IdealSource(3.7),
    thermal: {
      ambientC: 25,
      heatCapacityJPerK: 40,
      conductanceWPerK: 0.1,
      loadHeatFraction: 0,
      extraHeatW: 0,
    },
    loadOhm: 3,
    mosfetOhm: 0.01,
    frontEnd: { inputOffsetV: 0, connectionOhm: 0, voltageGainError: 0, noiseCounts: 0 },
    ...over,
  };
}

function quadRig(clock: VirtualClock, over: Partial<SimChannelOptions>[] = []): SimRig {
  return new SimRig({
    clock,
    profile: BENCH_PROFILE,
    channels: [0, 1, 2, 3].map((n) => channel(n, over[n])),
    clockError: 0,
    rigId: 'quad',
    firmware: 'sim-test',
  });
}

describe('simulated rig with several channels, protocol v1', () => {
  it('says hello with its channel count and sends one frame per channel per period, each channel counting its own sequence', () => {
    const clock = new VirtualClock();
    const h = harness(quadRig(clock), clock);
    clock.advance(1000);
    const m = decoded(h.lines());
    expect(m[0]).toEqual({
      kind: 'hello',
      rigId: 'quad',
      firmware: 'sim-test',
      adcBits: 12,
      channels: 4,
    });
    for (const ch of [0, 1, 2, 3])
      expect(dataOf(m, ch).map((f) => f.seq)).toEqual([...Array(10).keys()]);
    // One pass of the converter: the four frames of a period carry the same rig tick.
    const ticks = m.filter((x): x is DataFrame => x.kind === 'data').map((f) => f.tickMs);
    expect(ticks.slice(0, 4)).toEqual([100, 100, 100, 100]);
  });

  it('LOAD switches one channel only; a channel the rig lacks is answered CHANNEL', () => {
    const clock = new VirtualClock();
    const h = harness(quadRig(clock), clock);
    h.send({ command: 'LOAD', channel: 2, on: true });
    h.send({ command: 'LOAD', channel: 4, on: true });
    clock.advance(500);
    h.send({ command: 'BEAT' });
    const m = decoded(h.lines());
    expect(m.filter((x) => x.kind === 'rig-error')).toEqual([
      { kind: 'rig-error', code: 'CHANNEL', text: 'no channel 4' },
    ]);
    expect(dataOf(m, 2).every((f) => f.flags === FLAG_LOAD_ON)).toBe(true);
    for (const ch of [0, 1, 3]) expect(dataOf(m, ch).every((f) => f.flags === 0)).toBe(true);
    // Ohm's law: 3.7 V over 3 Ω load + 0.01 Ω switch + 0.02 Ω shunt (an ideal source has none of its own).
    expect(h.rig.truth(2).currentA).toBeCloseTo(3.7 / 3.03, 12);
    expect(h.rig.truth(1).currentA).toBe(0);
    expect(h.rig.loadLog(2)).toEqual([{ atMs: 0, on: true, cause: 'host' }]);
    expect(h.rig.loadLog(0)).toEqual([]);
  });

  it('one watchdog for the rig: a BEAT keeps every load on; without one every load is cut and flagged, each until its own LOAD on', () => {
    const clock = new VirtualClock();
    const h = harness(quadRig(clock), clock);
    h.send({ command: 'LOAD', channel: 0, on: true });
    h.send({ command: 'LOAD', channel: 3, on: true });
    for (let s = 0; s < 10; s++) {
      clock.advance(1000);
      h.send({ command: 'BEAT' });
    }
    expect(h.rig.truth(0).loadOn && h.rig.truth(3).loadOn).toBe(true);
    clock.advance(WATCHDOG_MS + 100);
    for (const ch of [0, 3]) {
      expect(h.rig.loadLog(ch).at(-1)).toEqual({
        atMs: 10_000 + WATCHDOG_MS,
        on: false,
        cause: 'watchdog',
      });
      expect(dataOf(decoded(h.lines()), ch).at(-1)!.flags).toBe(FLAG_RIG_FAULT);
    }
    // A channel that was off was not cut, so it carries no fault.
    expect(dataOf(decoded(h.lines()), 1).at(-1)!.flags).toBe(0);
    h.send({ command: 'LOAD', channel: 0, on: true });
    clock.advance(200);
    h.send({ command: 'BEAT' });
    expect(dataOf(decoded(h.lines()), 0).at(-1)!.flags).toBe(FLAG_LOAD_ON);
    expect(dataOf(decoded(h.lines()), 3).at(-1)!.flags).toBe(FLAG_RIG_FAULT);
  });

  it('switching one load off keeps the watchdog running for the others', () => {
    const clock = new VirtualClock();
    const h = harness(quadRig(clock), clock);
    h.send({ command: 'LOAD', channel: 0, on: true });
    h.send({ command: 'LOAD', channel: 1, on: true });
    clock.advance(1000);
    h.send({ command: 'LOAD', channel: 0, on: false });
    clock.advance(WATCHDOG_MS);
    expect(h.rig.loadLog(1).map((s) => s.cause)).toEqual(['host', 'watchdog']);
  });

  it('a broken thermistor lead reads as the rail: an open NTC in the low position pulls the input to the reference (common practice)', () => {
    const clock = new VirtualClock();
    const h = harness(
      quadRig(clock, [
        {},
        { thermistor: 'open' },
        { thermistor: 'short' },
        { thermistor: 'open', thermistorFailsAfterMs: 250 },
      ]),
      clock,
    );
    clock.advance(300);
    // A lead that breaks in use: right until 250 ms after its load first went on, the rail after.
    h.send({ command: 'LOAD', channel: 3, on: true });
    h.send({ command: 'BEAT' });
    clock.advance(300);
    const m = decoded(h.lines());
    expect(
      dataOf(m, 1)
        .slice(0, 3)
        .map((f) => f.tRaw),
    ).toEqual([4095, 4095, 4095]);
    expect(
      dataOf(m, 2)
        .slice(0, 3)
        .map((f) => f.tRaw),
    ).toEqual([0, 0, 0]);
    expect(dataOf(m, 3).map((f) => f.tRaw > 4000)).toEqual([
      false,
      false,
      false,
      false,
      false,
      true,
    ]);
    // 25 °C: the NTC equals its R25, so the divider of two 10 kΩ sits at half the reference.
    expect(dataOf(m, 0)[0]!.tRaw).toBe(2048);
  });

  it("a channel's cell behaves as it does alone on a one-channel rig, whatever its neighbours do", () => {
    const set = loadScenarios(SCENARIO_FILE);
    const quad = pickRigScenario(set, 'quad-a');
    const clockA = new VirtualClock();
    const multi = harness(buildMultiChannelRig(quad, clockA, BENCH_PROFILE), clockA);
    const clockB = new VirtualClock();
    const single = harness(buildSimRig(pickScenario(set, 'quick'), clockB, BENCH_PROFILE), clockB);
    for (const ch of [0, 1, 3]) multi.send({ command: 'LOAD', channel: ch, on: true });
    single.send({ command: 'LOAD', channel: 0, on: true });
    for (let s = 0; s < 20; s++) {
      for (const h of [multi, single]) {
        h.clock.advance(1000);
        h.send({ command: 'BEAT' });
      }
    }
    expect(multi.rig.truth(0).chargeAh).toBe(single.rig.truth(0).chargeAh);
    expect(multi.rig.truth(0).chargeAh).toBeGreaterThan(0.004);
  });

  it('the worn cell of the shipped rigs gives about its state of health times its rating before its cutoff', () => {
    const set = loadScenarios(SCENARIO_FILE);
    const clock = new VirtualClock();
    const h = harness(
      buildMultiChannelRig(pickRigScenario(set, 'quad-a'), clock, BENCH_PROFILE),
      clock,
    );
    h.send({ command: 'LOAD', channel: 0, on: true });
    h.send({ command: 'LOAD', channel: 1, on: true });
    // Charge is the time integral of current (physics): follow each until its terminal volts pass 3.0 V.
    const at: Record<number, number> = {};
    for (let s = 0; s < 120 && Object.keys(at).length < 2; s++) {
      clock.advance(1000);
      h.send({ command: 'BEAT' });
      for (const ch of [0, 1]) {
        const t = h.rig.truth(ch);
        if (at[ch] === undefined && t.terminalV < 3.0) {
          at[ch] = t.chargeAh;
          h.send({ command: 'LOAD', channel: ch, on: false });
        }
      }
    }
    expect(at[1]! / at[0]!).toBeGreaterThan(0.4);
    expect(at[1]! / at[0]!).toBeLessThan(0.55);
  });

  it('the shipped rigs load: each channel names a scenario, a missing one is refused with its key', () => {
    const set = loadScenarios(SCENARIO_FILE);
    expect([...pickRigScenario(set, 'station-a').channels.keys()]).toEqual([0, 1, 2, 3]);
    expect(pickRigScenario(set, 'octo').channels.size).toBe(8);
    expect(() => pickRigScenario(set, 'nope')).toThrow(/no simulated rig "nope".*station-a/);
  });
});
