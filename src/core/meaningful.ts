/**
 * Numbers in messages, rounded to the digits that carry meaning: 3.3 rather than 3.3000000001,
 * 2600 rather than 2600.000, and no trailing zeros.
 */
export function meaningful(x: number, digits = 4): string {
  if (!Number.isFinite(x)) return String(x);
  return Number(x.toPrecision(digits)).toString();
}
