import { describe, expect, it } from 'vitest';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';
import {
  betaCelsius,
  betaResistance,
  fitSteinhartHart,
  steinhartHartCelsius,
  steinhartHartResistance,
} from '../../src/chain/thermistor.js';

describe('Beta equation', () => {
  it('R0 = 10 kΩ, B = 3950 K, R = 5 kΩ reads 41.46 °C (Beta equation, computed from the formula)', () => {
    expect(betaCelsius(5000, 10_000, 3950)).toBeCloseTo(41.46, 2);
  });

  it('reads R0 at 25 °C (Beta equation: T0 = 298.15 K)', () => {
    expect(betaResistance(25, 10_000, 3950)).toBeCloseTo(10_000, 9);
    expect(betaCelsius(10_000, 10_000, 3950)).toBeCloseTo(25, 12);
  });

  it('goes both ways', () => {
    for (const t of [-40, -10, 0, 25, 41.46, 60, 100, 150]) {
      expect(betaCelsius(betaResistance(t, 10_000, 3950), 10_000, 3950)).toBeCloseTo(t, 9);
    }
  });

  it('gives NaN for a resistance that is not positive', () => {
    expect(betaCelsius(0, 10_000, 3950)).toBeNaN();
    expect(betaCelsius(-5, 10_000, 3950)).toBeNaN();
  });
});

describe('Steinhart–Hart equation (Steinhart and Hart, 1968)', () => {
  // A coefficient set widely printed for 10 kΩ NTCs (from memory); it reads about 25 °C at 10 kΩ.
  const common = { a: 1.129148e-3, b: 2.34125e-4, c: 8.76741e-8 };

  it('the widely printed 10 kΩ set reads 25 °C at 10 kΩ (from memory)', () => {
    expect(steinhartHartCelsius(10_000, common)).toBeCloseTo(25, 1);
  });

  it('goes both ways, the inverse solving the cubic', () => {
    for (const t of [-40, -20, 0, 25, 50, 85, 125]) {
      const r = steinhartHartResistance(t, common);
      expect(steinhartHartCelsius(r, common)).toBeCloseTo(t, 9);
    }
  });

  it('the inverse agrees with a plain c = 0 set (then it is the Beta equation)', () => {
    const b = 3950;
    const k = { a: 1 / 298.15 - Math.log(10_000) / b, b: 1 / b, c: 0 };
    expect(steinhartHartResistance(60, k)).toBeCloseTo(betaResistance(60, 10_000, b), 6);
  });

  it('a fit through three points of the Beta curve returns them to 0.01 °C and follows the curve between them (Steinhart–Hart, 1968)', () => {
    const pts = [0, 25, 60].map((celsius) => ({
      ohm: betaResistance(celsius, 10_000, 3950),
      celsius,
    })) as [
      { ohm: number; celsius: number },
      { ohm: number; celsius: number },
      { ohm: number; celsius: number },
    ];
    const k = fitSteinhartHart(pts);
    for (const p of pts)
      expect(Math.abs(steinhartHartCelsius(p.ohm, k) - p.celsius)).toBeLessThan(0.01);
    for (let t = 0; t <= 60; t += 2.5) {
      const r = betaResistance(t, 10_000, 3950);
      expect(Math.abs(steinhartHartCelsius(r, k) - t)).toBeLessThan(0.01);
    }
  });

  it('a fit through three points of the widely printed set recovers that set (from memory for the set)', () => {
    const pts = [-10, 25, 80].map((celsius) => ({
      ohm: steinhartHartResistance(celsius, common),
      celsius,
    })) as [
      { ohm: number; celsius: number },
      { ohm: number; celsius: number },
      { ohm: number; celsius: number },
    ];
    const k = fitSteinhartHart(pts);
    expect(k.a).toBeCloseTo(common.a, 9);
    expect(k.b).toBeCloseTo(common.b, 10);
    expect(k.c / common.c).toBeCloseTo(1, 5);
  });

  it('refuses two points at the same temperature, saying what to take instead', () => {
    const p = { ohm: 10_000, celsius: 25 };
    try {
      fitSteinhartHart([p, { ...p }, { ohm: 3000, celsius: 55 }]);
      expect.unreachable();
    } catch (err) {
      expect(err).toBeInstanceOf(CellvigilError);
      expect((err as CellvigilError).code).toBe(ErrorCodes.CALIBRATION_FIT);
      expect((err as Error).message).toMatch(/clearly different temperatures/);
    }
  });
});
