/**
 * NTC thermistor curves: the Beta equation and the Steinhart–Hart equation, each in both
 * directions, and a Steinhart–Hart fit through three (resistance, temperature) points.
 * Temperatures are in °C at the interface and in kelvin inside.
 */
import { ErrorCodes, makeError } from '../core/errors.js';

/** 0 °C in kelvin. */
export const KELVIN_OFFSET = 273.15;
/** The Beta equation's reference temperature, 25 °C, in kelvin. */
export const T0_K = 298.15;

/** Steinhart–Hart coefficients: 1/T = a + b·ln R + c·(ln R)³, T in kelvin, R in ohms. */
export interface SteinhartHart {
  a: number;
  b: number;
  c: number;
}

/** One point of a thermistor's curve. */
export interface ResistancePoint {
  ohm: number;
  celsius: number;
}

/** Resistance at `celsius` by the Beta equation R = R0·exp(B·(1/T − 1/T0)). */
export function betaResistance(celsius: number, r0Ohm: number, betaK: number): number {
  return r0Ohm * Math.exp(betaK * (1 / (celsius + KELVIN_OFFSET) - 1 / T0_K));
}

/** Temperature in °C at resistance `ohm` by the Beta equation (NaN for a resistance ≤ 0). */
export function betaCelsius(ohm: number, r0Ohm: number, betaK: number): number {
  if (!(ohm > 0)) return Number.NaN;
  return 1 / (1 / T0_K + Math.log(ohm / r0Ohm) / betaK) - KELVIN_OFFSET;
}

/** Temperature in °C at resistance `ohm` by Steinhart–Hart (NaN for a resistance ≤ 0). */
export function steinhartHartCelsius(ohm: number, k: SteinhartHart): number {
  if (!(ohm > 0)) return Number.NaN;
  const l = Math.log(ohm);
  return 1 / (k.a + k.b * l + k.c * l * l * l) - KELVIN_OFFSET;
}

/**
 * Resistance at `celsius` by Steinhart–Hart: solves c·y³ + b·y + (a − 1/T) = 0 for y = ln R
 * in closed form, then one Newton step to remove the rounding the cube roots leave.
 */
export function steinhartHartResistance(celsius: number, k: SteinhartHart): number {
  const target = 1 / (celsius + KELVIN_OFFSET);
  let y: number;
  if (k.c === 0) {
    y = (target - k.a) / k.b;
  } else {
    const p = k.b / k.c;
    const q = (k.a - target) / k.c;
    const disc = (q * q) / 4 + (p * p * p) / 27;
    if (disc >= 0) {
      const s = Math.sqrt(disc);
      y = Math.cbrt(-q / 2 + s) + Math.cbrt(-q / 2 - s);
    } else {
      // Three real roots (only for unusual coefficient sets): take the one nearest the
      // c = 0 solution, which is the branch a thermistor's working range lies on.
      const near = (target - k.a) / k.b;
      const m = 2 * Math.sqrt(-p / 3);
      const phi = Math.acos((3 * q) / (p * m)) / 3;
      y = m * Math.cos(phi);
      for (let j = 1; j < 3; j++) {
        const r = m * Math.cos(phi - (2 * Math.PI * j) / 3);
        if (Math.abs(r - near) < Math.abs(y - near)) y = r;
      }
    }
    const f = k.a + k.b * y + k.c * y * y * y - target;
    const df = k.b + 3 * k.c * y * y;
    if (df !== 0) y -= f / df;
  }
  return Math.exp(y);
}

/**
 * Steinhart–Hart coefficients through exactly three points (the equation has three unknowns,
 * so the curve passes through all three). The points need distinct resistances and
 * temperatures; spread them over the range the thermistor will be used in.
 */
export function fitSteinhartHart(
  points: readonly [ResistancePoint, ResistancePoint, ResistancePoint],
): SteinhartHart {
  const [p1, p2, p3] = points;
  for (const p of points) {
    if (
      !(p.ohm > 0) ||
      !Number.isFinite(p.ohm) ||
      !Number.isFinite(p.celsius) ||
      p.celsius <= -KELVIN_OFFSET
    ) {
      throw makeError(
        ErrorCodes.CALIBRATION_FIT,
        `thermistor point (${p.ohm} Ω, ${p.celsius} °C) is not a physical reading`,
        'Steinhart–Hart fit',
        'Give each point as a resistance > 0 Ω and a temperature above absolute zero.',
      );
    }
  }
  const l1 = Math.log(p1.ohm);
  const l2 = Math.log(p2.ohm);
  const l3 = Math.log(p3.ohm);
  const y1 = 1 / (p1.celsius + KELVIN_OFFSET);
  const y2 = 1 / (p2.celsius + KELVIN_OFFSET);
  const y3 = 1 / (p3.celsius + KELVIN_OFFSET);
  if (l1 === l2 || l1 === l3 || l2 === l3 || y1 === y2 || y1 === y3 || y2 === y3) {
    throw makeError(
      ErrorCodes.CALIBRATION_FIT,
      'two of the three thermistor points share a resistance or a temperature',
      'Steinhart–Hart fit',
      'Take three points at clearly different temperatures, e.g. near the low end, the middle and the high end of the range.',
    );
  }
  const g2 = (y2 - y1) / (l2 - l1);
  const g3 = (y3 - y1) / (l3 - l1);
  const c = (g3 - g2) / (l3 - l2) / (l1 + l2 + l3);
  const b = g2 - c * (l1 * l1 + l1 * l2 + l2 * l2);
  const a = y1 - (b + l1 * l1 * c) * l1;
  return { a, b, c };
}
