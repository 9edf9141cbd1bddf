import { describe, expect, it } from 'vitest';
import { VirtualClock } from '../../src/core/clock.js';
import { decodeRigLine } from '../../src/protocol/codec.js';
import type { DataFrame } from '../../src/protocol/messages.js';
import { RigTickCounter } from '../../src/sim/rig-clock.js';
import { harness, simpleRig } from './helpers.js';

function frames(lines: string[]): DataFrame[] {
  return lines
    .map((l) => decodeRigLine(l, 12))
    .flatMap((r) => (r.ok && r.message.kind === 'data' ? [r.message] : []));
}

describe('rig clock', () => {
  it('a rig 20 % fast advances its ticks 1.2 times as fast as true time', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock, { clockError: 0.2 }), clock);
    clock.advance(60_010);
    const f = frames(h.lines());
    const first = f[0]!;
    const last = f[f.length - 1]!;
    const trueMs = ((last.seq - first.seq) * 100) / 1.2; // frames come every 100 rig ms
    expect((last.tickMs - first.tickMs) / trueMs).toBeCloseTo(1.2, 3);
    // ...and a frame every 100 rig ms means 1.2 frames per true 100 ms.
    expect(f.length).toBe(720); // 60 s × 12 frames per second
  });

  it('wraps at 2^32', () => {
    const c = new RigTickCounter(0, 2 ** 32 - 50);
    expect(c.ticksAt(49)).toBe(2 ** 32 - 1);
    expect(c.ticksAt(50)).toBe(0);
    expect(c.ticksAt(150)).toBe(100);
  });

  it('a simulated rig booted near the wrap sends wrapped ticks that still decode', () => {
    const clock = new VirtualClock();
    const h = harness(simpleRig(clock, { startTick: 2 ** 32 - 250 }), clock);
    clock.advance(1000);
    const ticks = frames(h.lines()).map((f) => f.tickMs);
    expect(ticks[0]).toBe(2 ** 32 - 150);
    expect(ticks).toContain(50);
  });

  it('a slow clock counts slower', () => {
    expect(new RigTickCounter(-0.1).ticksAt(10_000)).toBe(9000);
    expect(new RigTickCounter(-0.1).trueMsFor(90)).toBeCloseTo(100, 12);
    expect(() => new RigTickCounter(-1)).toThrow(/above -1/);
  });
});
