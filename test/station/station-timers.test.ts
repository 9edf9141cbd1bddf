import { describe, expect, it } from 'vitest';
import { VirtualClock } from '../../src/core/clock.js';
import { StationTimers, type TimedChannel } from '../../src/station/station-timers.js';

interface Counted extends TimedChannel {
  ticks: number;
  flushes: number;
  checkpoints: number[];
  draws: number;
}

function channel(real: VirtualClock): Counted {
  const c: Counted = {
    ticks: 0,
    flushes: 0,
    checkpoints: [],
    draws: 0,
    tick: () => void c.ticks++,
    flush: async () => void c.flushes++,
    checkpoint: () => void c.checkpoints.push(real.now()),
    draw: () => void c.draws++,
  };
  return c;
}

// The periods a one-channel run keeps on timers of its own (a tick every 0.1 s, a flush every
// 1 s, a checkpoint every 5 s, the status every 0.25 s): a station's channel must see the same.
describe("a station's shared timers", () => {
  it('give every channel the periods of its own timers, checkpoints spread over the flush passes', () => {
    const real = new VirtualClock();
    const timers = new StationTimers(real);
    const chans = Array.from({ length: 10 }, () => channel(real));
    for (const c of chans) timers.join(c, null);
    real.advance(10_000);
    for (const c of chans) {
      expect(c.ticks).toBe(100);
      expect(c.flushes).toBe(10);
      expect(c.draws).toBe(40);
      expect(c.checkpoints).toHaveLength(2);
      expect(c.checkpoints[1]! - c.checkpoints[0]!).toBe(5000);
    }
    // Spread over the passes: never two channels' checkpoints in one turn, nor all ten at once.
    const at = chans.flatMap((c) => c.checkpoints);
    expect(new Set(at).size).toBe(at.length);
  });

  it("tick each channel on its own clock's time (a simulated rig's virtual clock)", () => {
    const real = new VirtualClock();
    const sim = new VirtualClock();
    const timers = new StationTimers(real);
    const onSim = channel(real);
    const onHost = channel(real);
    timers.join(onSim, sim);
    timers.join(onHost, null);
    sim.advance(60_000);
    real.advance(1000);
    expect(onSim.ticks).toBe(600);
    expect(onHost.ticks).toBe(10);
  });

  it('stop calling a channel that left, and hold no timer once every channel has left', () => {
    const real = new VirtualClock();
    const timers = new StationTimers(real);
    const a = channel(real);
    const b = channel(real);
    const leaveA = timers.join(a, null);
    const leaveB = timers.join(b, null);
    real.advance(1000);
    leaveA();
    leaveA();
    real.advance(1000);
    expect(a.flushes).toBe(1);
    expect(b.flushes).toBe(2);
    leaveB();
    real.advance(10_000);
    expect(b.ticks).toBe(20);
    // No timer of the station's is left on the clock: a timer of ours would have kept firing.
    expect((real as unknown as { queue: unknown[] }).queue).toHaveLength(0);
  });
});
