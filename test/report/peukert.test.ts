import { linearRegression } from 'simple-statistics';
import { describe, expect, it } from 'vitest';
import { CellvigilError } from '../../src/core/errors.js';
import { fitPeukert, peukertHours } from '../../src/report/peukert.js';
import { gaussian, mulberry32 } from '../../src/sim/prng.js';

describe("Peukert's law", () => {
  it('worked value: H = 20 h, C = 100 Ah, k = 1.2, I = 10 A gives t = 8.7055 h (computed from the formula)', () => {
    expect(peukertHours(20, 100, 1.2, 10)).toBeCloseTo(8.7055, 4);
  });

  it('at the H-hour current the law gives H hours (from the formula: C/(I·H) = 1)', () => {
    expect(peukertHours(20, 100, 1.3, 5)).toBeCloseTo(20, 12);
  });

  it('the fit recovers k and C from runs that follow the law exactly', () => {
    const runs = [2, 5, 10, 20, 40].map((currentA) => ({
      currentA,
      hours: peukertHours(20, 100, 1.2, currentA),
    }));
    const fit = fitPeukert(runs, 20);
    expect(fit.k).toBeCloseTo(1.2, 10);
    expect(fit.capacityAh).toBeCloseTo(100, 8);
    expect(fit.uK).toBeCloseTo(0, 10);
    expect(fit.currentRangeA).toEqual([2, 40]);
  });

  it('on scattered runs k matches a general-purpose regression (simple-statistics) of ln t on ln I', () => {
    const rng = mulberry32(61);
    const runs = [0.3, 0.5, 0.8, 1.2, 2.0, 3.0].map((currentA) => ({
      currentA,
      hours: peukertHours(20, 2.6, 1.08, currentA) * (1 + 0.01 * gaussian(rng)),
    }));
    const fit = fitPeukert(runs, 20);
    const reference = linearRegression(runs.map((r) => [Math.log(r.currentA), Math.log(r.hours)]));
    expect(fit.k).toBeCloseTo(-reference.m, 10);
    expect(Math.abs(fit.k - 1.08)).toBeLessThan(3 * fit.uK!);
  });

  it('refuses runs at one current', () => {
    expect(() =>
      fitPeukert([
        { currentA: 1, hours: 2 },
        { currentA: 1.05, hours: 1.9 },
      ]),
    ).toThrow(CellvigilError);
  });
});
