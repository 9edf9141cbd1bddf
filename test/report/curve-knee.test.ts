import { describe, expect, it } from 'vitest';
import { CurveBuilder } from '../../src/report/curve.js';
import { voltageChargeSeries } from '../../src/report/run-plots.js';

/*
 * A synthetic constant-current discharge of our own: a sloping plateau and an exponential fall
 * at the end, V(q) = V0 - a·q - b·exp((q - Q)/w). Its slope is -a - (b/w)·exp((q - Q)/w), so
 * the knee, taken here as the charge where the slope is ten times the plateau's, is in closed
 * form q_k = Q + w·ln(9·a·w/b) (calculus of the curve itself). 3 A for an hour at 10 frames a
 * second: 37 000 frames into at most 1024 buckets.
 */
const V0 = 4.1;
const a = 0.2;
const b = 0.02;
const w = 0.03;
const Q = 3;
const CUTOFF = 3.0;
const volts = (q: number): number => V0 - a * q - b * Math.exp((q - Q) / w);
const KNEE_AH = Q + w * Math.log((9 * a * w) / b);

function plotted(noiseV: number): ReadonlyArray<readonly [number, number]> {
  const curve = new CurveBuilder();
  for (let i = 0; ; i++) {
    const q = (3 * i * 0.1) / 3600;
    // A deterministic wobble as a reading's noise, so the test reads the same every time.
    const v = volts(q) + noiseV * Math.sin(i * 12.9898);
    if (volts(q) <= CUTOFF) break;
    curve.add({
      hostS: i * 0.1,
      chargeAh: q,
      energyWh: 0,
      volts: v,
      amps: 3,
      celsius: 25,
      loadOn: true,
    });
  }
  expect(curve.buckets.length).toBeLessThanOrEqual(1024);
  expect(curve.buckets.length).toBeGreaterThanOrEqual(512);
  return voltageChargeSeries(curve.buckets, 'cell', '#000').points;
}

describe('the knee of a discharge is drawn finely when the curve is thinned', () => {
  for (const noiseV of [0, 0.002]) {
    it(`with ${noiseV * 1000} mV of noise: many points past the knee, no coarse step`, () => {
      const points = plotted(noiseV);
      const range = points[0]![1] - points.at(-1)![1];
      // The knee sits 0.03 Ah before the end, about 1 % of the run: evenly thinned buckets
      // leave it about a dozen points and steps of 6 % of the plot's height.
      expect(KNEE_AH).toBeCloseTo(3.0298, 4);
      const pastKnee = points.filter(([q]) => q >= KNEE_AH);
      expect(pastKnee.length).toBeGreaterThanOrEqual(40);
      let largestStep = 0;
      for (let i = 1; i < points.length; i++)
        largestStep = Math.max(largestStep, Math.abs(points[i]![1] - points[i - 1]![1]));
      expect(largestStep / range).toBeLessThan(0.02);
      // The last point is near the cutoff, not a bucket's worth above it.
      expect(points.at(-1)![1] - CUTOFF).toBeLessThan(0.02 * range);
    });
  }
});

/*
 * A long run on a coarse, noisy ADC (our own scenario): 400 000 frames, readings on a 1.6 mV
 * step with up to two steps of wobble, so early on, while the voltage range is still a few
 * millivolts, the noise is larger than the fine step. The plot should still cover the whole
 * run evenly, not a few stretches finely and the rest in a handful of coarse buckets.
 */
describe('a long run with readings noisier than the fine step', () => {
  it('spreads its buckets over the whole run', () => {
    const frames = 400_000;
    const lsb = 0.0016;
    const curve = new CurveBuilder();
    for (let i = 0; i < frames; i++) {
      const f = i / frames;
      const v = 4.02 - 0.6 * f - 0.25 * f ** 10 + lsb * (((i * 7919) % 5) - 2);
      curve.add({
        hostS: i * 0.05,
        chargeAh: f * 3,
        energyWh: f * 11,
        volts: Math.round(v / lsb) * lsb,
        amps: 0.12,
        celsius: 25,
        loadOn: true,
      });
    }
    const buckets = curve.buckets;
    expect(buckets.length).toBeGreaterThanOrEqual(512);
    expect(buckets.length).toBeLessThanOrEqual(1024);
    const tenths = Array.from({ length: 10 }, () => 0);
    for (const b of buckets) tenths[Math.min(9, Math.floor(b.t0 / (frames * 0.005)))]!++;
    // An even spread would give each tenth a tenth of the buckets; none gets under half of
    // that, nor more than four times it (the fall at the end may take more).
    for (const n of tenths) {
      expect(n).toBeGreaterThanOrEqual(buckets.length / 20);
      expect(n).toBeLessThanOrEqual((buckets.length * 4) / 10);
    }
  });
});
