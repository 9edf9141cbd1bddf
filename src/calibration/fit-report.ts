/** Plain-text printout of captured points and of each quantity's fit, for `calibrate`. */
import { UNITS, type CalibrationPoint, type Quantity } from './calibration.js';
import type { QuantityOutcome } from './quantity-fit.js';

/** Six significant digits, no exponent for ordinary magnitudes. */
export function sig(x: number, digits = 6): string {
  if (!Number.isFinite(x)) return String(x);
  if (x === 0) return '0';
  const a = Math.abs(x);
  if (a >= 1e-4 && a < 1e7) {
    const decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(a)));
    return x.toFixed(Math.min(decimals, 12));
  }
  return x.toExponential(digits - 1);
}

function signed(x: number, digits = 3): string {
  return `${x >= 0 ? '+' : ''}${sig(x, digits)}`;
}

/** One line for a captured point: what the rig read and what the reference said. */
export function formatPoint(label: string, quantity: Quantity, p: CalibrationPoint): string {
  const unit = UNITS[quantity];
  const spread =
    p.raw_sd !== undefined && p.samples !== undefined
      ? ` sd ${p.raw_sd.toFixed(2)} n ${p.samples}`
      : '';
  return (
    `${label}: raw mean ${p.raw_mean.toFixed(2)}${spread} -> nominal ${sig(p.nominal)} ± ${sig(p.nominal_u ?? 0, 2)} ${unit}; ` +
    `reference ${sig(p.reference)} ± ${sig(p.reference_u, 2)} ${unit}`
  );
}

const MODEL_TEXT = { gain_offset: 'gain and offset', offset: 'offset only, gain 1' } as const;

/** The fit of one quantity: the line, its uncertainties, and every point's residual. */
export function formatOutcome(o: QuantityOutcome): string[] {
  const unit = UNITS[o.quantity];
  const { fit, points } = o.calibration;
  const lines: string[] = [];
  const weighted = points.every((p) => Math.hypot(p.reference_u, p.nominal_u ?? 0) > 0)
    ? 'weighted by 1/u²'
    : 'unweighted';
  lines.push(
    `${o.quantity}: reference = ${sig(fit.gain)} × nominal ${fit.offset < 0 ? '-' : '+'} ${sig(Math.abs(fit.offset))} ${unit}` +
      `   (${MODEL_TEXT[fit.model]}, ${points.length} point${points.length === 1 ? '' : 's'}, ${weighted}, dof ${fit.dof})`,
  );
  if (fit.model === 'gain_offset')
    lines.push(
      `  gain         ${sig(fit.gain)}   u ${sig(fit.u_gain, 2)} (${sig((100 * fit.u_gain) / fit.gain, 2)} %)`,
    );
  lines.push(`  offset       ${sig(fit.offset)} ${unit}   u ${sig(fit.u_offset, 2)} ${unit}`);
  if (fit.model === 'gain_offset')
    lines.push(`  cov(gain, offset) ${sig(fit.cov_gain_offset, 3)} ${unit}`);
  lines.push(
    `  residual sd  ${fit.dof > 0 ? `${sig(fit.residual_sd, 3)} ${unit}` : '- (no degrees of freedom: the line passes through the points)'}`,
  );
  lines.push(
    `  ${'#'.padStart(2)}  ${'raw mean'.padStart(10)}  ${'nominal'.padStart(12)}  ${'reference ± u'.padStart(24)}  ${'residual'.padStart(11)}  ${'std.res'.padStart(7)}`,
  );
  points.forEach((p, k) => {
    const raw = p.reference - (fit.gain * p.nominal + fit.offset);
    // What is left of rounding in a line through the point is not a residual worth showing.
    const residual = Math.abs(raw) < 1e-9 * Math.max(1, Math.abs(p.reference)) ? 0 : raw;
    const z = o.standardized[k]!;
    const mark = o.outliers.includes(k) ? '  <- does not fit' : '';
    lines.push(
      `  ${String(k + 1).padStart(2)}  ${p.raw_mean.toFixed(2).padStart(10)}  ${sig(p.nominal).padStart(12)}  ` +
        `${`${sig(p.reference)} ± ${sig(p.reference_u, 2)}`.padStart(24)}  ${signed(residual).padStart(11)}  ` +
        `${(Number.isNaN(z) ? '-' : z.toFixed(2)).padStart(7)}${mark}`,
    );
  });
  for (const w of o.warnings) lines.push(`  warning: ${w}`);
  return lines;
}
