import { describe, expect, it } from 'vitest';
import { fitLine, type FitPoint } from '../../src/calibration/fit.js';

/**
 * Weighted straight-line least squares in closed form, as the handbooks give it (Press et al.,
 * Numerical Recipes, "Fitting Data to a Straight Line"; Bevington & Robinson, ch. 6):
 * S = Σ1/σ², Sx = Σx/σ², Sy = Σy/σ², Sxx = Σx²/σ², Sxy = Σxy/σ², Δ = S·Sxx − Sx²,
 * offset a = (Sxx·Sy − Sx·Sxy)/Δ, gain b = (S·Sxy − Sx·Sy)/Δ,
 * σa² = Sxx/Δ, σb² = S/Δ, cov(a, b) = −Sx/Δ.
 */
function handbook(points: readonly Required<FitPoint>[]) {
  let S = 0;
  let Sx = 0;
  let Sy = 0;
  let Sxx = 0;
  let Sxy = 0;
  for (const { x, y, u } of points) {
    const w = 1 / (u * u);
    S += w;
    Sx += w * x;
    Sy += w * y;
    Sxx += w * x * x;
    Sxy += w * x * y;
  }
  const D = S * Sxx - Sx * Sx;
  const a = (Sxx * Sy - Sx * Sxy) / D;
  const b = (S * Sxy - Sx * Sy) / D;
  const chi2 = points.reduce((s, p) => s + ((p.y - a - b * p.x) / p.u) ** 2, 0);
  return { a, b, ua: Math.sqrt(Sxx / D), ub: Math.sqrt(S / D), cov: -Sx / D, chi2 };
}

function rel(actual: number, expected: number): number {
  return Math.abs(actual - expected) / Math.abs(expected);
}

describe('weighted fitLine against the closed-form weighted least squares (Numerical Recipes; Bevington & Robinson)', () => {
  // A current channel checked at five loads with a meter whose uncertainty grows with the range.
  const xs = [0.031, 0.552, 1.071, 2.143, 3.201];
  const us = [0.0005, 0.002, 0.003, 0.006, 0.009];
  const ds = [0.0002, -0.0008, 0.001, -0.002, 0.003];
  const points: Required<FitPoint>[] = xs.map((x, i) => ({
    x,
    y: 0.96154 * x - 0.02981 + ds[i]!,
    u: us[i]!,
  }));

  it('gives the same gain, offset, standard uncertainties and covariance when the scatter is within the stated u', () => {
    const h = handbook(points);
    // The premise of the unscaled formulas: χ² no larger than its degrees of freedom.
    expect(h.chi2).toBeLessThan(points.length - 2);
    const r = fitLine(points);
    expect(r.weighted).toBe(true);
    expect(rel(r.gain, h.b)).toBeLessThan(1e-12);
    expect(rel(r.offset, h.a)).toBeLessThan(1e-10);
    expect(rel(r.u_gain, h.ub)).toBeLessThan(1e-12);
    expect(rel(r.u_offset, h.ua)).toBeLessThan(1e-12);
    expect(rel(r.cov_gain_offset, h.cov)).toBeLessThan(1e-12);
  });

  it('differs from the unweighted line when the uncertainties differ', () => {
    const h = handbook(points);
    const plain = fitLine(points.map(({ x, y }) => ({ x, y })));
    expect(plain.weighted).toBe(false);
    expect(Math.abs(plain.offset - h.a)).toBeGreaterThan(1e-5);
  });

  it('scales the covariance by χ²/(n − 2) when the scatter exceeds the stated u', () => {
    const loose = points.map((p, i) => ({ ...p, y: p.y + (i % 2 === 0 ? 3 : -3) * p.u }));
    const h = handbook(loose);
    const dof = loose.length - 2;
    expect(h.chi2).toBeGreaterThan(dof);
    const r = fitLine(loose);
    const k = Math.sqrt(h.chi2 / dof);
    expect(rel(r.gain, h.b)).toBeLessThan(1e-12);
    expect(rel(r.u_gain, h.ub * k)).toBeLessThan(1e-12);
    expect(rel(r.u_offset, h.ua * k)).toBeLessThan(1e-12);
    expect(rel(r.cov_gain_offset, h.cov * k * k)).toBeLessThan(1e-12);
  });
});
