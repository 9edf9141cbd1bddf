import { describe, expect, it } from 'vitest';
import { parseAccuracy, rectangularU } from '../../src/calibration/reference-accuracy.js';
import { CellvigilError, ErrorCodes } from '../../src/core/errors.js';

describe('a reference meter’s stated accuracy as a standard uncertainty', () => {
  it('a rectangular half-width a has u = a/√3 (GUM, JCGM 100:2008 4.3.7)', () => {
    expect(rectangularU(0.003)).toBeCloseTo(0.003 / Math.sqrt(3), 15);
    expect(rectangularU(-1)).toBeCloseTo(0.5773502691896258, 15);
  });

  it('percent of reading plus a fixed part add up to the half-width', () => {
    // ±(0.5 % of 2 A + 2 mA) = ±12 mA.
    expect(parseAccuracy('0.5%+0.002', 2, 'x', 'A').u).toBeCloseTo(0.012 / Math.sqrt(3), 15);
    expect(parseAccuracy('±0.5 % + 0.002', -2, 'x', 'A').u).toBeCloseTo(0.012 / Math.sqrt(3), 15);
    expect(parseAccuracy('+/-1%', 4, 'x', 'V').u).toBeCloseTo(0.04 / Math.sqrt(3), 15);
    expect(parseAccuracy('0.002', 4, 'x', 'V').u).toBeCloseTo(0.002 / Math.sqrt(3), 15);
    expect(parseAccuracy('2e-3', 4, 'x', 'V').u).toBeCloseTo(0.002 / Math.sqrt(3), 15);
    expect(parseAccuracy('0.5%+0.002', 2, 'x', 'A').basis).toContain('rectangular');
  });

  it('a standard uncertainty is taken as it is', () => {
    expect(parseAccuracy('u=0.0012', 2, 'x', 'A').u).toBe(0.0012);
    expect(parseAccuracy(' u = 0 ', 0, 'x', 'A').u).toBe(0);
  });

  it('refuses what is not an accuracy, saying the forms it takes', () => {
    for (const bad of ['', 'abc', '%', '0.5%%', 'u=', 'u=-1', '-0.5%']) {
      let err: unknown;
      try {
        parseAccuracy(bad, 1, 'points.yaml, point 2', 'A');
      } catch (e) {
        err = e;
      }
      expect(err, bad).toBeInstanceOf(CellvigilError);
      expect((err as CellvigilError).code).toBe(ErrorCodes.USAGE);
      expect((err as Error).message).toContain('u=0.001');
      expect((err as Error).message).toContain('points.yaml, point 2');
    }
  });
});
