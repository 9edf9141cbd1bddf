import { describe, expect, it } from 'vitest';
import { Unwrapper } from '../../src/timebase/unwrap.js';

// Counter widths from the protocol document: seq wraps at 2^16, tick_ms at 2^32.

/** The value and its step, as one pair. */
function next(u: Unwrapper, raw: number): { value: number; step: number | null } {
  const value = u.next(raw);
  return { value, step: u.step };
}

describe('Unwrapper', () => {
  it('seq 65535 -> 0 is one step forward', () => {
    const u = new Unwrapper(65536);
    expect(next(u, 65534)).toEqual({ value: 65534, step: null });
    expect(next(u, 65535)).toEqual({ value: 65535, step: 1 });
    expect(next(u, 0)).toEqual({ value: 65536, step: 1 });
    expect(next(u, 3)).toEqual({ value: 65539, step: 3 });
  });

  it('tick 2^32 - 1 -> 99 is 100 ms forward', () => {
    const u = new Unwrapper(2 ** 32);
    next(u, 2 ** 32 - 1);
    expect(next(u, 99)).toEqual({ value: 2 ** 32 + 99, step: 100 });
  });

  it('keeps counting over many laps', () => {
    const u = new Unwrapper(65536);
    let last = { value: 0, step: null as number | null };
    for (let k = 0; k <= 5 * 65536; k += 1000) last = next(u, k % 65536);
    expect(last.value).toBe(Math.floor((5 * 65536) / 1000) * 1000);
    expect(last.step).toBe(1000);
  });

  it('a step back across the wrap is negative and does not shift the following values', () => {
    const u = new Unwrapper(65536);
    next(u, 65530);
    expect(next(u, 5)).toEqual({ value: 65541, step: 11 });
    // a late frame from before the wrap
    expect(next(u, 65533)).toEqual({ value: 65533, step: -8 });
    // the next frame lands where it would have without the late one
    expect(next(u, 6)).toEqual({ value: 65542, step: 9 });
  });

  it('reset forgets the history', () => {
    const u = new Unwrapper(65536);
    next(u, 65535);
    next(u, 1);
    u.reset();
    expect(next(u, 7)).toEqual({ value: 7, step: null });
  });
});
