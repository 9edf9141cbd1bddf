/**
 * A reference meter's stated accuracy turned into a standard uncertainty. Meters state limits
 * ("±(0.5 % of reading + 0.002)"); with nothing known about the distribution inside them they
 * are taken as rectangular, u = a/√3 (GUM, JCGM 100:2008 4.3.7). A standard uncertainty known
 * already (from the meter's calibration certificate) is given as `u=<value>` and used as is.
 */
import { ErrorCodes, makeError } from '../core/errors.js';

export interface ReferenceUncertainty {
  /** Standard uncertainty, in the reading's unit. */
  u: number;
  /** How it was obtained, for the printout. */
  basis: string;
}

/** Standard uncertainty of a rectangular distribution of half-width `a` (JCGM 100:2008 4.3.7). */
export function rectangularU(a: number): number {
  return Math.abs(a) / Math.sqrt(3);
}

const NUMBER = '(\\d+(?:\\.\\d*)?|\\.\\d+)(?:[eE]([+-]?\\d+))?';
const STANDARD = new RegExp(`^u\\s*=\\s*${NUMBER}$`);
const LIMITS = new RegExp(`^(?:±|\\+/-|\\+-)?\\s*(?:${NUMBER}\\s*%)?\\s*(?:\\+?\\s*${NUMBER})?$`);

function num(mantissa: string | undefined, exponent: string | undefined): number {
  return Number(`${mantissa ?? '0'}${exponent !== undefined ? `e${exponent}` : ''}`);
}

/**
 * Parses `u=0.001` (a standard uncertainty) or limits `0.5%`, `0.5%+0.002`, `±0.002` (percent of
 * the reading plus a fixed part, in the reading's unit, taken as rectangular).
 */
export function parseAccuracy(
  text: string,
  reading: number,
  where: string,
  unit: string,
): ReferenceUncertainty {
  const s = text.trim().replace(/\s+/g, ' ');
  const std = STANDARD.exec(s);
  if (std) {
    const u = num(std[1], std[2]);
    return { u, basis: `standard uncertainty ${u} ${unit}` };
  }
  const lim = LIMITS.exec(s);
  if (lim && s !== '' && (lim[1] !== undefined || lim[3] !== undefined)) {
    const pct = lim[1] !== undefined ? num(lim[1], lim[2]) : 0;
    const fixed = lim[3] !== undefined ? num(lim[3], lim[4]) : 0;
    const a = (Math.abs(reading) * pct) / 100 + fixed;
    return {
      u: rectangularU(a),
      basis: `limits ±${formatLimits(pct, fixed, unit)} = ±${round(a)} ${unit}, rectangular: u = a/√3`,
    };
  }
  throw makeError(
    ErrorCodes.USAGE,
    `"${text}" is not an accuracy`,
    where,
    `Give the meter's limits as percent of reading plus a fixed part in ${unit}, e.g. "0.5%+0.002", "0.5%" or "0.002" (taken as rectangular, u = a/√3), or a standard uncertainty as "u=0.001".`,
  );
}

function formatLimits(pct: number, fixed: number, unit: string): string {
  if (pct === 0) return `${fixed} ${unit}`;
  if (fixed === 0) return `${pct} % of reading`;
  return `(${pct} % of reading + ${fixed} ${unit})`;
}

function round(x: number): number {
  return Number(x.toPrecision(6));
}
