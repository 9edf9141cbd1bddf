import { describe, expect, it } from 'vitest';
import { VirtualClock } from '../../src/core/clock.js';
import { decodeRigLine, frameLine } from '../../src/protocol/codec.js';
import {
  FLAG_LOAD_ON,
  FLAG_RIG_FAULT,
  type DataFrame,
  type RigMessage,
} from '../../src/protocol/messages.js';
import { WATCHDOG_MS } from '../../src/sim/sim-rig.js';
import { harness, simpleRig } from './helpers.js';

function decoded(lines: string[]): RigMessage[] {
  return lines.map((l) => {
    const r = decodeRigLine(l, 12);
    if (!r.ok) throw new Error(`rejected ${r.reason}: ${JSON.stringify(l)}`);
    return r.message;
  });
}
const dataOf = (m: RigMessage[]) => m.filter((x): x is DataFrame => x.kind === 'data');

describe('simulated rig, protocol v1', () => {
  it('says hello at boot and on request, then sends a frame every period', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock), clock);
    expect(h.lines()).toEqual([frameLine('H,test-rig,sim-test,12,1').trimEnd()]);
    clock.advance(1000);
    h.send({ command: 'HELLO' });
    const m = decoded(h.lines());
    expect(dataOf(m).map((f) => f.seq)).toEqual([0, 1, 2, 3, 4, 5, 6, 7, 8, 9]);
    expect(m[m.length - 1]).toEqual({
      kind: 'hello',
      rigId: 'test-rig',
      firmware: 'sim-test',
      adcBits: 12,
      channels: 1,
    });
  });

  it('LOAD switches the load, is acknowledged, logged, and shows in flag bit 0', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock), clock);
    clock.advance(250);
    h.send({ command: 'LOAD', channel: 0, on: true });
    clock.advance(500);
    h.send({ command: 'LOAD', channel: 0, on: false });
    clock.advance(500);
    const m = decoded(h.lines());
    expect(m.filter((x) => x.kind === 'ack')).toEqual([
      { kind: 'ack', command: 'LOAD', args: ['0', '1'] },
      { kind: 'ack', command: 'LOAD', args: ['0', '0'] },
    ]);
    expect(dataOf(m).map((f) => f.flags)).toEqual([0, 0, 1, 1, 1, 1, 1, 0, 0, 0, 0, 0]);
    expect(h.rig.loadLog()).toEqual([
      { atMs: 250, on: true, cause: 'host' },
      { atMs: 750, on: false, cause: 'host' },
    ]);
    // 3.7 V over 3 + 0.01 + 0.02 Ω while on: the current channel reads it, then falls back to zero.
    const iRaw = dataOf(m).map((f) => f.iRaw);
    expect(iRaw[3]).toBe(Math.floor(((3.7 / 3.03) * 0.02 * 30.3 * 4096) / 3.3));
    expect(iRaw[10]).toBe(0);
    expect(h.rig.truth().loadOnS).toBeCloseTo(0.5, 9);
  });

  it('watchdog: load on and no BEAT → load off within 5 s (+ one frame period), flag bit 1 set until the host switches on again', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock), clock);
    h.send({ command: 'LOAD', channel: 0, on: true });
    clock.advance(WATCHDOG_MS + 100);
    const log = h.rig.loadLog();
    expect(log[log.length - 1]).toEqual({ atMs: WATCHDOG_MS, on: false, cause: 'watchdog' });
    const f = dataOf(decoded(h.lines()));
    const last = f[f.length - 1]!;
    expect(last.flags & FLAG_LOAD_ON).toBe(0);
    expect(last.flags & FLAG_RIG_FAULT).toBe(FLAG_RIG_FAULT);
    expect(h.rig.truth().currentA).toBe(0);
    clock.advance(2000);
    expect(dataOf(decoded(h.lines())).at(-1)!.flags).toBe(FLAG_RIG_FAULT);
    h.send({ command: 'LOAD', channel: 0, on: true });
    clock.advance(300);
    expect(dataOf(decoded(h.lines())).at(-1)!.flags).toBe(FLAG_LOAD_ON);
  });

  it('watchdog: with a BEAT every second the load stays on', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock), clock);
    h.send({ command: 'LOAD', channel: 0, on: true });
    for (let s = 0; s < 60; s++) {
      clock.advance(1000);
      h.send({ command: 'BEAT' });
    }
    expect(h.rig.loadLog()).toHaveLength(1);
    expect(dataOf(decoded(h.lines())).every((f) => f.flags === FLAG_LOAD_ON)).toBe(true);
    // BEAT is not acknowledged: the only replies are the hello and one LOAD ack.
    expect(decoded(h.lines()).filter((x) => x.kind !== 'data')).toHaveLength(2);
  });

  it('watchdog counts only BEAT: repeating LOAD on does not keep the load on', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock), clock);
    for (let s = 0; s < 8; s++) {
      h.send({ command: 'LOAD', channel: 0, on: true });
      clock.advance(1000);
    }
    expect(h.rig.loadLog().map((s) => s.cause)).toEqual(['host', 'watchdog', 'host']);
  });

  it('takes commands split across reads, several in one read, and with \\r\\n endings', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock), clock);
    const on = frameLine('C,LOAD,0,1');
    h.rig.receive(on.slice(0, 5));
    h.rig.receive(on.slice(5, -1) + '\r\n' + frameLine('C,HELLO') + '\n');
    const m = decoded(h.lines()).filter((x) => x.kind !== 'data');
    expect(m.map((x) => x.kind)).toEqual(['hello', 'ack', 'hello']);
    expect(h.rig.truth().loadOn).toBe(true);
  });

  it('answers bad commands with E lines and never switches on them', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock), clock);
    h.rig.receive('C,LOAD,0,1|0000\n');
    h.rig.receive('C,LOAD,0,1\n');
    h.rig.receive(frameLine('C,LOAD,0'));
    h.rig.receive(frameLine('C,LOAD,0,2'));
    h.rig.receive(frameLine('C,LOAD,3,1'));
    h.rig.receive(frameLine('C,FLY'));
    h.rig.receive('x'.repeat(500));
    h.rig.receive('yy\n');
    const errs = decoded(h.lines()).flatMap((x) => (x.kind === 'rig-error' ? [x.code] : []));
    expect(errs).toEqual(['CRC', 'CRC', 'SYNTAX', 'RANGE', 'CHANNEL', 'SYNTAX', 'OVERLONG']);
    expect(h.rig.loadLog()).toHaveLength(0);
  });

  it('every line decodes except injected garbage; dropped frames show as sequence gaps', () => {
    const clock = new VirtualClock();
    const rig = simpleRig(clock, {
      faults: { dropProbability: 0.1, garbageProbability: 0.1, burstFrames: 1 },
      seed: 99,
    });
    const h = harness(rig, clock);
    clock.advance(120_000);
    const results = h.lines().map((l) => decodeRigLine(l, 12));
    const t = rig.truth();
    expect(t.garbageLines).toBeGreaterThan(50);
    expect(t.framesDropped).toBeGreaterThan(50);
    expect(results.filter((r) => !r.ok)).toHaveLength(t.garbageLines);
    const seqs = results.flatMap((r) => (r.ok && r.message.kind === 'data' ? [r.message.seq] : []));
    expect(seqs).toHaveLength(t.framesSent);
    let missing = 0;
    for (let k = 1; k < seqs.length; k++) missing += seqs[k]! - seqs[k - 1]! - 1;
    missing += seqs[0]!; // frames lost before the first one that arrived
    const frameCount = t.framesSent + t.framesDropped;
    missing += frameCount - 1 - seqs[seqs.length - 1]!; // and after the last
    expect(missing).toBe(t.framesDropped);
  });

  it('the same seed gives the same bytes', () => {
    const run = (seed: number) => {
      const clock = new VirtualClock();
      const rig = simpleRig(clock, {
        faults: { dropProbability: 0.05, garbageProbability: 0.05, burstFrames: 1 },
        frontEnd: { inputOffsetV: 0, connectionOhm: 0, voltageGainError: 0, noiseCounts: 1.5 },
        seed,
      });
      const h = harness(rig, clock);
      clock.advance(20_000);
      return h.chunks.join('');
    };
    expect(run(5)).toBe(run(5));
    expect(run(5)).not.toBe(run(6));
  });

  it('burst mode writes N frames per chunk; a reply flushes what is queued first, keeping order', () => {
    const clock = new VirtualClock();
    const h = harness(
      simpleRig(clock, { faults: { dropProbability: 0, garbageProbability: 0, burstFrames: 5 } }),
      clock,
    );
    clock.advance(1000);
    expect(h.chunks.slice(1).map((c) => c.split('\n').length - 1)).toEqual([5, 5]);
    clock.advance(300);
    h.send({ command: 'HELLO' });
    const lastChunk = decoded(h.chunks.at(-1)!.split('\n').slice(0, -1));
    expect(lastChunk.map((x) => x.kind)).toEqual(['data', 'data', 'data', 'hello']);
    expect(dataOf(decoded(h.lines())).map((f) => f.seq)).toEqual([...Array(13).keys()]);
  });

  it('stop powers down: the load drops out and nothing more is written', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock), clock);
    h.send({ command: 'LOAD', channel: 0, on: true });
    clock.advance(1000);
    h.rig.stop();
    const n = h.chunks.length;
    clock.advance(10_000);
    h.send({ command: 'HELLO' });
    expect(h.chunks).toHaveLength(n);
    expect(h.rig.loadLog().at(-1)).toEqual({ atMs: 1000, on: false, cause: 'stop' });
    expect(h.rig.truth().elapsedS).toBeCloseTo(1, 9);
  });
});
