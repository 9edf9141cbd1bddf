import { describe, expect, it } from 'vitest';
import { Integrator } from '../../src/session/integrator.js';
import { TimeBase } from '../../src/timebase/time-base.js';

// Charge is the time integral of current (physics): 2 A for 60 s is 1/30 Ah, whatever the
// rig's own clock says.
describe('a rig clock far off, frames delivered evenly', () => {
  for (const error of [-0.2, 0.2]) {
    it(`clock ${error > 0 ? 'fast' : 'slow'} by ${Math.abs(error) * 100} %: 2 A for 60 s integrates to 33.33 mAh within 0.1 %`, () => {
      const tb = new TimeBase();
      const integ = new Integrator();
      const periodHostMs = 100;
      const frames = 601;
      let first = 0;
      let last = 0;
      for (let k = 0; k < frames; k++) {
        const arrival = 5000 + k * periodHostMs + 3; // a constant transport delay
        const tick = Math.round(k * periodHostMs * (1 + error));
        const s = tb.stamp(k, tick, arrival);
        if (k === 0) first = s.hostMs;
        last = s.hostMs;
        integ.add(s.dtMs, 4, 2, true, s.gap);
      }
      const want = (2 * ((frames - 1) * periodHostMs)) / 3_600_000;
      expect(Math.abs(integ.chargeAh - want) / want).toBeLessThan(1e-3);
      // The stamps end where the frames arrived: no lag left behind.
      expect(5000 + (frames - 1) * periodHostMs + 3 - last).toBeLessThan(20);
      expect(first).toBe(5003);
    });
  }
});

// The host's monotonic clock stands still while the host is suspended; the rig's does not.
describe('a host suspended for ten minutes', () => {
  it('is flagged as a gap although the host clock barely moved', () => {
    const tb = new TimeBase();
    for (let k = 0; k < 100; k++) expect(tb.stamp(k, k * 100, 1000 + k * 100).gap).toBe(false);
    const after = tb.stamp(100, 99 * 100 + 600_000, 1000 + 99 * 100 + 150);
    expect(after.gap).toBe(true);
    // Nothing is integrated over time the host did not see.
    expect(after.dtMs).toBeLessThanOrEqual(150);
  });
});
