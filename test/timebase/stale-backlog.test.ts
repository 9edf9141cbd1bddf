import { describe, expect, it } from 'vitest';
import { VirtualClock } from '../../src/core/clock.js';
import { decodeRigLine } from '../../src/protocol/codec.js';
import { TimeBase } from '../../src/timebase/time-base.js';
import { simpleRig } from '../sim/helpers.js';

/**
 * The simulated rig starts before the host opens its port; what it sent meanwhile waits in the
 * port's buffer and arrives in one read when the port opens, then frames come as they are made.
 */
function rigClockEstimate(o: { clockError: number; backlogMs: number; runMs: number }): number {
  const clock = new VirtualClock();
  const rig = simpleRig(clock, { clockError: o.clockError, framePeriodMs: 50 });
  const tb = new TimeBase();
  let open = false;
  const held: string[] = [];
  const take = (chunk: string): void => {
    for (const line of chunk.split('\n').filter(Boolean)) {
      const d = decodeRigLine(line, 12);
      if (d.ok && d.message.kind === 'data') tb.stamp(d.message.seq, d.message.tickMs, clock.now());
    }
  };
  rig.start((chunk) => (open ? take(chunk) : held.push(chunk)));
  clock.advance(o.backlogMs);
  open = true;
  take(held.join(''));
  clock.advance(o.runMs - o.backlogMs);
  rig.stop();
  const ppm = tb.rigClockErrorPpm();
  if (ppm === null) throw new Error('no rig clock estimate');
  return ppm;
}

// A rig clock's rate is ticks counted per unit of true time (physics); the simulated rig's
// error is known exactly, so the estimate is checked against it.
describe('frames buffered before the port opened', () => {
  for (const clockError of [0, -0.2, 0.2]) {
    it(`are not taken as fresh: a 20 s run after a 1.5 s backlog reads a rig clock ${clockError * 100} % off within 200 ppm`, () => {
      const ppm = rigClockEstimate({ clockError, backlogMs: 1500, runMs: 20_000 });
      expect(Math.abs(ppm - clockError * 1e6)).toBeLessThan(200);
    });
  }

  it('control: without a backlog the same run reads the exact clock within 200 ppm', () => {
    expect(Math.abs(rigClockEstimate({ clockError: 0, backlogMs: 0, runMs: 20_000 }))).toBeLessThan(
      200,
    );
  });
});
