import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { linearRegression } from 'simple-statistics';
import { DownsampledHistory } from '../../src/live/history.js';
import { CutoffEstimator } from '../../src/live/cutoff-estimate.js';
import type { HistoryPoint } from '../../src/live/live-types.js';

const pt = (t: number): HistoryPoint => [t, 0, 0, null, 0, 0];

describe('downsampled history', () => {
  it('never holds more than its capacity, keeps the first sample, and spreads points evenly over any run length', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 4, max: 300 }),
        fc.integer({ min: 1, max: 20_000 }),
        (cap, n) => {
          const h = new DownsampledHistory(cap);
          for (let i = 0; i < n; i++) h.add(pt(i));
          const ts = h.snapshot().map((p) => p[0]);
          expect(ts.length).toBeLessThanOrEqual(cap);
          expect(ts[0]).toBe(0);
          // Every kept sample index is a multiple of the stride: the spacing is uniform.
          for (const t of ts) expect(t % h.stride).toBe(0);
          for (let i = 1; i < ts.length; i++) expect(ts[i]! - ts[i - 1]!).toBe(h.stride);
          // And nothing newer than one stride is missing at the end.
          expect(n - 1 - ts[ts.length - 1]!).toBeLessThan(h.stride);
          // At least half the capacity is used once the run is longer than it.
          if (n >= cap) expect(ts.length).toBeGreaterThanOrEqual(Math.floor(cap / 2));
        },
      ),
      { numRuns: 200 },
    );
  });

  it('a five-hour run at 10 samples a second still fits in the bound and covers the whole run', () => {
    const h = new DownsampledHistory(2000);
    const n = 5 * 3600 * 10;
    for (let i = 0; i < n; i++) h.add(pt(i / 10));
    const ts = h.snapshot().map((p) => p[0]);
    expect(ts.length).toBeLessThanOrEqual(2000);
    expect(ts[0]).toBe(0);
    expect(ts[ts.length - 1]!).toBeGreaterThan(5 * 3600 - (h.stride / 10) * 1.01);
  });
});

describe('time-to-cutoff estimate', () => {
  it('fits the same slope as an independent least-squares routine (simple-statistics linearRegression)', () => {
    fc.assert(
      fc.property(
        fc.array(fc.double({ min: -0.02, max: 0.02, noNaN: true }), {
          minLength: 40,
          maxLength: 200,
        }),
        fc.double({ min: -1e-3, max: 1e-4, noNaN: true }),
        (noise, slope) => {
          const e = new CutoffEstimator({ windowS: 1e5, maxPoints: 1e5, minSpanS: 0 });
          const pairs: Array<[number, number]> = noise.map((n, i) => [
            i * 2,
            4 + slope * i * 2 + n,
          ]);
          for (const [t, v] of pairs) e.add(t, v, true);
          const ref = linearRegression(pairs);
          const fit = e.fit()!;
          expect(fit.slope).toBeCloseTo(ref.m, 10);
          expect(fit.intercept).toBeCloseTo(ref.b, 8);
        },
      ),
      { numRuns: 100 },
    );
  });

  it('on a straight falling line gives the time the line takes to reach the cutoff (t = ΔV / slope, algebra)', () => {
    const e = new CutoffEstimator({ windowS: 300, minSpanS: 30 });
    // 4.00 V falling 1 mV/s, cutoff 3.70 V: 300 s from the start, so 300 − 120 s after the newest point.
    for (let t = 0; t <= 120; t += 1) e.add(t, 4.0 - 0.001 * t, true);
    const est = e.estimate(3.7);
    expect(est.slope_V_per_s).toBeCloseTo(-0.001, 12);
    expect(est.time_to_cutoff_s).toBeCloseTo(180, 6);
  });

  it('gives no estimate while the voltage is flat or rising, before the window spans minSpanS, or with the load off', () => {
    const e = new CutoffEstimator({ minSpanS: 30 });
    for (let t = 0; t <= 20; t++) e.add(t, 4 - 0.001 * t, true);
    expect(e.estimate(3).time_to_cutoff_s).toBeNull();
    for (let t = 21; t <= 60; t++) e.add(t, 4 + 0.001 * t, true);
    expect(e.estimate(3).time_to_cutoff_s).toBeNull();
    e.add(61, 3.9, false);
    expect(e.points).toBe(0);
    expect(e.estimate(3)).toEqual({ time_to_cutoff_s: null, slope_V_per_s: null });
  });

  it('keeps a bounded window at any sample rate', () => {
    const e = new CutoffEstimator({ windowS: 300, maxPoints: 240 });
    for (let i = 0; i < 200_000; i++) e.add(i / 100, 4 - i * 1e-7, true);
    expect(e.points).toBeLessThanOrEqual(242);
  });
});
