import { describe, expect, it } from 'vitest';
import {
  fitQuantity,
  sealCalibration,
  type Calibration,
} from '../../src/calibration/calibration.js';
import {
  combineContributions,
  meanU,
  runUncertainty,
  type UncertaintyInput,
} from '../../src/results/uncertainty.js';
import { gaussian, mulberry32 } from '../../src/sim/prng.js';

const SQRT3 = Math.sqrt(3);

/** A calibration of the current channel from three reference points (demo numbers). */
function calibration(): Calibration {
  const point = (shown: number, ref: number) => ({
    raw_mean: shown / 0.0013,
    nominal: shown,
    reference: ref,
    reference_u: 0.002,
  });
  return sealCalibration({
    format: 1,
    rig: 'bench rig',
    date: '2026-11-30T09:00:00Z',
    reference_instrument: 'bench multimeter (demo)',
    current: fitQuantity(
      'current',
      [point(0.2381, 0.2), point(1.0706, 1.0), point(2.1112, 2.0)],
      'gain_offset',
    ).calibration,
  });
}

const run = (over: Partial<UncertaintyInput> = {}): UncertaintyInput => ({
  chargeAh: 1.0,
  energyWh: 3.7,
  nominalAh: 1.05,
  onS: 3600,
  samples: 36_000,
  ampsPerCount: 0.0053,
  voltsPerCount: 0.0016,
  meanVoltageV: 3.7,
  bridgedAh: 0,
  calibration: null,
  ...over,
});

const term = (u: ReturnType<typeof runUncertainty>['capacity_Ah'], start: string): number => {
  const t = u.terms.find((x) => x.name.startsWith(start));
  if (!t) throw new Error(`no term "${start}"`);
  return t.u;
};

describe('uncertainty budget by the GUM (JCGM 100:2008)', () => {
  it('a rectangular half-width a gives u = a/√3 (4.3.7)', () => {
    const u = runUncertainty(run()).capacity_Ah;
    expect(term(u, 'uncalibrated current gain')).toBeCloseTo((1.0 * 0.05) / SQRT3, 12);
    expect(term(u, 'uncalibrated current offset')).toBeCloseTo((1 * 0.05) / SQRT3, 12);
    expect(term(u, 'host time base')).toBeCloseTo((1.0 * 100e-6) / SQRT3, 15);
    // Quantisation: half a count either side, a = count/2.
    expect(term(u, 'current quantisation')).toBeCloseTo(0.0053 / 2 / SQRT3 / Math.sqrt(36_000), 15);
  });

  it('the load switching instants: each switch rectangular with u = a/√3 (4.3.7), independent switches in quadrature (5.1.2), worked by hand', () => {
    // Worked by hand: on at 2 A inside a 100 ms step, placed mid-step: a = 2 A × 0.05 s =
    // 0.1 A·s = 2.77778e-5 Ah, u = a/√3 = 1.60375e-5 Ah; off at 1.5 A acknowledged 6 ms after
    // the last frame: a = 1.5 A × 0.006 s = 2.5e-6 Ah, u = 1.44338e-6 Ah; together
    // √(u₁² + u₂²) = 1.61023e-5 Ah.
    const loadSwitches = {
      count: 2,
      sumSqHalfWidthAh: (0.1 / 3600) ** 2 + (0.009 / 3600) ** 2,
      widestMs: 100,
    };
    const u = runUncertainty(run({ loadSwitches }));
    const name = 'load switching instants';
    expect(term(u.capacity_Ah, name) / 1.61023e-5).toBeCloseTo(1, 5);
    const t = u.capacity_Ah.terms.find((x) => x.name.startsWith(name))!;
    expect(t.type).toBe('B');
    expect(t.basis).toContain('2 switches');
    expect(t.basis).toContain('100 ms');
    // The energy's term is the charge's at the mean voltage, as the other charge terms.
    expect(term(u.energy_Wh, name) / (3.7 * 1.61023e-5)).toBeCloseTo(1, 5);
    // No switch seen, no term; and the term enters the combined standard uncertainty.
    const without = runUncertainty(run()).capacity_Ah;
    expect(without.terms.some((x) => x.name.startsWith(name))).toBe(false);
    expect(u.capacity_Ah.standard ** 2 / (without.standard ** 2 + 1.61023e-5 ** 2)).toBeCloseTo(
      1,
      5,
    );
  });

  it('combines in quadrature for independent inputs (5.1.2) and linearly for fully correlated ones (5.2.2, r = 1)', () => {
    expect(combineContributions([3, 4])).toBeCloseTo(5, 12);
    expect(combineContributions([3, 4], () => 1)).toBeCloseTo(7, 12);
    expect(combineContributions([3, 4], (i, j) => (i === j ? 1 : -1))).toBeCloseTo(1, 12);
  });

  it('the calibration term is common to every sample: two equal halves of a run add linearly', () => {
    const cal = calibration();
    const half = runUncertainty(
      run({ chargeAh: 0.5, nominalAh: 0.525, onS: 1800, samples: 18_000, calibration: cal }),
    ).capacity_Ah;
    const whole = runUncertainty(run({ calibration: cal })).capacity_Ah;
    const name = 'current calibration fit';
    expect(term(whole, name)).toBeCloseTo(term(half, name) + term(half, name), 12);
    expect(term(whole, name)).toBeCloseTo(
      combineContributions([term(half, name), term(half, name)], () => 1),
      12,
    );
    // The reference meter's scale error is common as well.
    expect(term(whole, 'reference meter scale')).toBeCloseTo(
      2 * term(half, 'reference meter scale'),
      12,
    );
  });

  it('independent per-sample noise averages down: two halves add in quadrature, and 4× the samples halve it (4.2.3)', () => {
    const half = runUncertainty(
      run({ chargeAh: 0.5, onS: 1800, samples: 18_000, currentNoiseA: 0.004 }),
    ).capacity_Ah;
    const whole = runUncertainty(run({ currentNoiseA: 0.004 })).capacity_Ah;
    const dense = runUncertainty(run({ currentNoiseA: 0.004, samples: 144_000 })).capacity_Ah;
    const name = 'current noise';
    expect(term(whole, name)).toBeCloseTo(Math.hypot(term(half, name), term(half, name)), 15);
    expect(term(dense, name)).toBeCloseTo(term(whole, name) / 2, 15);
    expect(term(whole, name)).toBeCloseTo(1 * meanU(0.004, 36_000), 15);
  });

  it('is expanded with k = 2', () => {
    const u = runUncertainty(run({ calibration: calibration(), currentNoiseA: 0.004 }));
    for (const f of [u.capacity_Ah, u.energy_Wh]) {
      expect(f.k).toBe(2);
      expect(f.expanded).toBeCloseTo(2 * f.standard, 15);
      expect(f.standard).toBeCloseTo(Math.sqrt(f.terms.reduce((s, t) => s + t.u ** 2, 0)), 15);
    }
  });

  it('agrees with a Monte Carlo propagation of the same inputs (JCGM 101:2008, GUM Supplement 1)', () => {
    // Constant nominal current for one hour; gain and offset drawn once per trial from the fit's
    // covariance (common to the whole run), noise drawn per sample.
    const cal = calibration();
    const f = cal.current!.fit;
    const xA = 1.05;
    const n = 900;
    const dtH = 1 / n;
    const sd = 0.02;
    const rng = mulberry32(2008);
    const rho = f.cov_gain_offset / (f.u_gain * f.u_offset);
    const trials = 3000;
    const qs: number[] = [];
    for (let k = 0; k < trials; k++) {
      const z1 = gaussian(rng);
      const z2 = rho * z1 + Math.sqrt(1 - rho * rho) * gaussian(rng);
      const g = f.gain + f.u_gain * z1;
      const o = f.offset + f.u_offset * z2;
      let q = 0;
      for (let i = 0; i < n; i++) q += (g * xA + o + sd * gaussian(rng)) * dtH;
      qs.push(q);
    }
    const mean = qs.reduce((a, b) => a + b, 0) / trials;
    const mcSd = Math.sqrt(qs.reduce((a, b) => a + (b - mean) ** 2, 0) / (trials - 1));
    const gum = runUncertainty(
      run({
        chargeAh: mean,
        nominalAh: xA,
        onS: 3600,
        samples: n,
        ampsPerCount: 0,
        currentNoiseA: sd,
        calibration: cal,
      }),
    ).capacity_Ah;
    const fitAndNoise = Math.hypot(
      term(gum, 'current calibration fit'),
      term(gum, 'current noise'),
    );
    // 3000 trials estimate a standard deviation to about 1.3 %.
    expect(mcSd / fitAndNoise).toBeGreaterThan(0.95);
    expect(mcSd / fitAndNoise).toBeLessThan(1.05);
  });
});
