import { readFileSync } from 'node:fs';
import fc from 'fast-check';
import { linearRegression } from 'simple-statistics';
import { describe, expect, it } from 'vitest';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import { fitLine, fitOffset, type FitPoint } from '../../src/calibration/fit.js';

/** Relative agreement to `digits` significant digits. */
function expectSignificant(actual: number, certified: number, digits: number): void {
  expect(Math.abs(actual - certified) / Math.abs(certified)).toBeLessThan(0.5 * 10 ** (1 - digits));
}

function refusal(fn: () => unknown): CellvigilError {
  try {
    fn();
  } catch (err) {
    expect(err).toBeInstanceOf(CellvigilError);
    return err as CellvigilError;
  }
  throw new Error('the fit was not refused');
}

describe('fitLine against NIST StRD "Norris"', () => {
  const csv = readFileSync(new URL('../fixtures/nist-strd-norris.csv', import.meta.url), 'utf8');
  const rows = csv
    .split('\n')
    .filter((l) => l.trim() !== '' && !l.startsWith('#') && !l.startsWith('y,'))
    .map((l) => l.split(',').map(Number) as [number, number]);
  const points: FitPoint[] = rows.map(([y, x]) => ({ x, y }));

  it('reads the 36 observations', () => {
    expect(points).toHaveLength(36);
  });

  it('matches the certified values to 10 significant digits (NIST StRD Norris)', () => {
    const r = fitLine(points);
    expect(r.weighted).toBe(false);
    expect(r.dof).toBe(34);
    expectSignificant(r.offset, -0.262323073774029, 10);
    expectSignificant(r.u_offset, 0.232818234301152, 10);
    expectSignificant(r.gain, 1.00211681802045, 10);
    expectSignificant(r.u_gain, 0.429796848199937e-3, 10);
    expectSignificant(r.residual_sd, 0.884796396144373, 10);
    // Residual sum of squares 26.6173985294224 (NIST StRD Norris, CSV header).
    expectSignificant(
      r.residuals.reduce((s, e) => s + e * e, 0),
      26.6173985294224,
      10,
    );
  });

  it('still matches when x is shifted far from zero (the sums are centred)', () => {
    const shift = 1e7;
    const r = fitLine(points.map((p) => ({ x: p.x + shift, y: p.y })));
    expectSignificant(r.gain, 1.00211681802045, 9);
    expectSignificant(r.u_gain, 0.429796848199937e-3, 9);
    expectSignificant(r.residual_sd, 0.884796396144373, 9);
  });

  it('flags a planted error and leaves the genuine Norris points alone', () => {
    // Norris's largest studentized residual is about 3.2 (observation 29), so 3.5 keeps it.
    const options = { outlierThreshold: 3.5 };
    expect(fitLine(points, options).outliers).toEqual([]);
    const planted = points.map((p, i) => (i === 7 ? { ...p, y: p.y + 10 } : p));
    expect(fitLine(planted, options).outliers).toEqual([7]);
    expect(fitLine(planted, options).standardized[7]).toBeGreaterThan(5);
  });
});

describe('fitLine against a general-purpose reference library (simple-statistics linearRegression)', () => {
  it('agrees on gain and offset for random data', () => {
    fc.assert(
      fc.property(
        fc.array(
          fc.tuple(
            fc.double({ min: -1000, max: 1000, noNaN: true }),
            fc.double({ min: -1000, max: 1000, noNaN: true }),
          ),
          {
            minLength: 3,
            maxLength: 40,
          },
        ),
        (pairs) => {
          const xs = pairs.map(([x]) => x);
          fc.pre(Math.max(...xs) - Math.min(...xs) > 1e-3);
          const r = fitLine(pairs.map(([x, y]) => ({ x, y })));
          const ref = linearRegression(pairs);
          const scale = 1 + Math.max(...pairs.map(([, y]) => Math.abs(y)));
          expect(Math.abs(r.gain - ref.m)).toBeLessThan(1e-8 * (1 + Math.abs(ref.m)) * scale);
          expect(Math.abs(r.offset - ref.b)).toBeLessThan(1e-8 * scale * (1 + Math.abs(ref.m)));
        },
      ),
      { seed: 20240607, numRuns: 300 },
    );
  });
});

describe('fitLine on calibration-sized data', () => {
  it('recovers a current channel showing 33 mA + 1.057 × true current from two reference points (fact of the trade)', () => {
    const shown = (trueA: number): number => 0.033 + 1.057 * trueA;
    // Reference (true) against nominal (shown): true = (shown − 33 mA) / 1.057.
    const r = fitLine([
      { x: shown(0.2), y: 0.2 },
      { x: shown(3), y: 3 },
    ]);
    expect(r.gain).toBeCloseTo(1 / 1.057, 12);
    expect(r.offset).toBeCloseTo(-0.033 / 1.057, 12);
    for (const a of [0, 0.5, 1.7, 2.5, 4]) expect(r.gain * shown(a) + r.offset).toBeCloseTo(a, 12);
    expect(r.dof).toBe(0);
    expect(r.residual_sd).toBe(0);
  });

  it('with two points propagates the stated uncertainties through the two-point formulas (GUM, JCGM 100:2008 5.1.2)', () => {
    const u1 = 0.002;
    const u2 = 0.005;
    const r = fitLine([
      { x: 1, y: 1.1, u: u1 },
      { x: 3, y: 3.2, u: u2 },
    ]);
    // gain = (y2 − y1)/(x2 − x1): u² = (u1² + u2²)/Δx².
    expect(r.u_gain).toBeCloseTo(Math.sqrt(u1 ** 2 + u2 ** 2) / 2, 15);
    // offset = (x2·y1 − x1·y2)/Δx: u² = (x2²u1² + x1²u2²)/Δx².
    expect(r.u_offset).toBeCloseTo(Math.sqrt(9 * u1 ** 2 + u2 ** 2) / 2, 15);
    expect(r.cov_gain_offset).toBeCloseTo(-(3 * u1 ** 2 + 1 * u2 ** 2) / 4, 15);
  });

  it('a weighted fit with equal weights gives the unweighted line', () => {
    const pts = [0.1, 0.9, 2.1, 2.9, 4.2].map((x, i) => ({
      x,
      y: 1.02 * x + 0.01 + [0.001, -0.002, 0.0015, 0, -0.001][i]!,
    }));
    const plain = fitLine(pts);
    const weighted = fitLine(pts.map((p) => ({ ...p, u: 0.004 })));
    expect(weighted.weighted).toBe(true);
    expect(weighted.gain).toBeCloseTo(plain.gain, 13);
    expect(weighted.offset).toBeCloseTo(plain.offset, 13);
  });

  it('weights favour the better-known point', () => {
    const r = fitLine([
      { x: 0, y: 0, u: 0.001 },
      { x: 1, y: 1, u: 0.001 },
      { x: 2, y: 2.3, u: 1 },
    ]);
    expect(r.gain).toBeCloseTo(1, 3);
  });

  it('uncertainties from stated u are not shrunk by a suspiciously good scatter, but grow with a bad one', () => {
    const xs = [0, 1, 2, 3, 4];
    const exact = fitLine(xs.map((x) => ({ x, y: 2 * x + 1, u: 0.01 })));
    const scattered = fitLine(
      xs.map((x, i) => ({ x, y: 2 * x + 1 + (i % 2 ? 0.1 : -0.1), u: 0.01 })),
    );
    const priorGain = 0.01 / Math.sqrt(10); // u / sqrt(Σ(x − x̄)²)
    expect(exact.u_gain).toBeCloseTo(priorGain, 14);
    expect(scattered.u_gain).toBeGreaterThan(5 * priorGain);
  });

  it('refuses fewer than two points, saying to take a second point', () => {
    for (const pts of [[], [{ x: 1, y: 1 }]]) {
      const e = refusal(() => fitLine(pts, { quantity: 'current' }));
      expect(e.code).toBe(ErrorCodes.CALIBRATION_FIT);
      expect(e.message).toContain('at least 2 reference points');
      expect(e.message).toContain('Take a second point at a clearly different current');
    }
  });

  it('refuses the same nominal value twice (no gain can be found)', () => {
    const e = refusal(() =>
      fitLine(
        [
          { x: 1.5, y: 1.49 },
          { x: 1.5, y: 1.51 },
        ],
        { quantity: 'current', where: 'calibrate: current' },
      ),
    );
    expect(e.code).toBe(ErrorCodes.CALIBRATION_FIT);
    expect(e.message).toContain('same nominal current');
    expect(e.message).toContain('calibrate: current');
    expect(e.message).toContain('Take a second point at a clearly different current');
  });

  it('refuses a reading that is not a number', () => {
    const e = refusal(() =>
      fitLine([
        { x: 1, y: Number.NaN },
        { x: 2, y: 2 },
      ]),
    );
    expect(e.code).toBe(ErrorCodes.CALIBRATION_FIT);
    expect(e.message).toContain('Retake that point');
  });
});

describe('fitOffset', () => {
  it('one point gives the offset exactly, with that point’s uncertainty', () => {
    const r = fitOffset([{ x: 24.3, y: 25.0, u: 0.1 }]);
    expect(r.gain).toBe(1);
    expect(r.offset).toBeCloseTo(0.7, 12);
    expect(r.u_offset).toBe(0.1);
    expect(r.dof).toBe(0);
  });

  it('several points give the mean difference and its standard error', () => {
    const d = [0.6, 0.7, 0.8, 0.7];
    const r = fitOffset(d.map((di, i) => ({ x: 20 + i, y: 20 + i + di })));
    expect(r.offset).toBeCloseTo(0.7, 12);
    const sd = Math.sqrt(d.reduce((s, v) => s + (v - 0.7) ** 2, 0) / 3);
    expect(r.residual_sd).toBeCloseTo(sd, 12);
    expect(r.u_offset).toBeCloseTo(sd / 2, 12);
    expect(r.dof).toBe(3);
  });

  it('refuses no points', () => {
    const e = refusal(() => fitOffset([], { quantity: 'temperature' }));
    expect(e.code).toBe(ErrorCodes.CALIBRATION_FIT);
    expect(e.message).toContain('Take a reference reading of the temperature');
  });
});
