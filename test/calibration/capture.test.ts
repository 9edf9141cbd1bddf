import fc from 'fast-check';
import { mean, sampleStandardDeviation } from 'simple-statistics';
import { describe, expect, it } from 'vitest';
import {
  CountAverager,
  meanUncertaintyCounts,
  PointWindow,
} from '../../src/calibration/capture.js';
import { FLAG_LOAD_ON, FLAG_RIG_FAULT, type DataFrame } from '../../src/protocol/messages.js';

function frame(over: Partial<DataFrame> = {}): DataFrame {
  return {
    kind: 'data',
    channel: 0,
    seq: 0,
    tickMs: 0,
    vRaw: 2600,
    iRaw: 900,
    tRaw: 2100,
    flags: FLAG_LOAD_ON,
    ...over,
  };
}

describe('CountAverager against a reference library (simple-statistics mean, sampleStandardDeviation)', () => {
  it('agrees on mean and sample standard deviation for random ADC counts', () => {
    fc.assert(
      fc.property(
        fc.array(fc.integer({ min: 0, max: 65535 }), { minLength: 2, maxLength: 400 }),
        (counts) => {
          const a = new CountAverager();
          for (const c of counts) a.add(c);
          const s = a.stats();
          expect(s.n).toBe(counts.length);
          expect(Math.abs(s.mean - mean(counts))).toBeLessThan(1e-9 * (1 + mean(counts)));
          const sd = sampleStandardDeviation(counts);
          expect(Math.abs(s.sd - sd)).toBeLessThan(1e-7 * (1 + sd));
          expect(s.se).toBeCloseTo(s.sd / Math.sqrt(counts.length), 12);
          expect([s.min, s.max]).toEqual([Math.min(...counts), Math.max(...counts)]);
        },
      ),
      { seed: 31337, numRuns: 200 },
    );
  });

  it('keeps full precision for a long window of large, nearly equal counts', () => {
    const a = new CountAverager();
    for (let k = 0; k < 100_000; k++) a.add(60000 + (k % 2));
    expect(a.stats().mean).toBeCloseTo(60000.5, 9);
    expect(a.stats().sd).toBeCloseTo(Math.sqrt(0.25 * (100_000 / 99_999)), 9);
  });
});

describe('uncertainty of a mean count', () => {
  it('is the standard error when the noise dithers the rounding', () => {
    const s = { n: 50, mean: 900.3, sd: 0.8, se: 0.8 / Math.sqrt(50), min: 898, max: 902 };
    expect(meanUncertaintyCounts(s)).toBe(s.se);
  });

  it('without dither, never less than the rectangular ±½ count: 1/√12 (GUM, JCGM 100:2008 4.3.7)', () => {
    const s = { n: 50, mean: 900, sd: 0, se: 0, min: 900, max: 900 };
    expect(meanUncertaintyCounts(s)).toBeCloseTo(0.5 / Math.sqrt(3), 15);
  });
});

describe('PointWindow', () => {
  it('averages only frames of its channel, inside the window, with the load as the condition says', () => {
    const w = new PointWindow({ channel: 0, loadOn: true, startMs: 1000, endMs: 2000 });
    expect(w.offer(frame({ iRaw: 1 }), 999)).toBe(false);
    expect(w.offer(frame({ iRaw: 2, channel: 1 }), 1500)).toBe(false);
    expect(w.offer(frame({ iRaw: 3, flags: 0 }), 1100)).toBe(false);
    expect(w.offer(frame({ iRaw: 900 }), 1000, { voltage: 4, current: 1.2, temperature: 22 })).toBe(
      true,
    );
    expect(
      w.offer(frame({ iRaw: 902 }), 1999.9, { voltage: 4.2, current: 1.4, temperature: 24 }),
    ).toBe(true);
    expect(w.offer(frame({ iRaw: 5 }), 2000)).toBe(false);
    const r = w.result();
    expect(r.current.n).toBe(2);
    expect(r.current.mean).toBe(901);
    expect(r.skipped).toBe(1);
    expect(r.truth!.current).toBeCloseTo(1.3, 12);
    expect(r.truth!.voltage).toBeCloseTo(4.1, 12);
  });

  it('counts frames carrying the rig-fault flag', () => {
    const w = new PointWindow({ channel: 0, loadOn: false, startMs: 0, endMs: 10 });
    w.offer(frame({ flags: FLAG_RIG_FAULT }), 1);
    expect(w.result().faults).toBe(1);
    expect(w.result().truth).toBeNull();
  });
});
