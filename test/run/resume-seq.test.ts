import { describe, expect, it } from 'vitest';
import { framesLostAcrossResume } from '../../src/run/resume.js';

// Protocol v1: the sequence number counts frames modulo 65 536 and a gap means frames were
// lost; the tick counter is the rig's milliseconds since boot, so a smaller one means it restarted.
describe('frames lost across a resume', () => {
  const last = { seq: 1000, tickMs: 200_000, hostS: 100, msPerFrame: 50 };

  it('the rig still counting: the sequence step less one', () => {
    expect(framesLostAcrossResume(last, { seq: 1601, tickMs: 230_000, hostS: 130 })).toEqual({
      count: 600,
      estimated: false,
    });
  });

  it('across a wrap of the sequence number', () => {
    const near = { ...last, seq: 65_500 };
    expect(framesLostAcrossResume(near, { seq: 99, tickMs: 205_000, hostS: 105 }).count).toBe(134);
  });

  it('down longer than one turn of the counter (65 536 frames at 20 a second is 55 min): the turns come from the time down', () => {
    // 60 min down at 50 ms a frame: 72 000 frames, that is one turn and 6 464 more.
    const first = { seq: (1000 + 72_000) % 65_536, tickMs: 200_000 + 3_600_000, hostS: 3700 };
    expect(framesLostAcrossResume(last, first)).toEqual({ count: 71_999, estimated: false });
  });

  it('the rig restarted meanwhile: estimated from the time down and the frame rate', () => {
    expect(framesLostAcrossResume(last, { seq: 40, tickMs: 2_000, hostS: 130 })).toEqual({
      count: 599,
      estimated: true,
    });
  });
});
