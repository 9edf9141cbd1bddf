/** The lines a program run adds to the summary printed at its end: its segments and cycles. */
import type { RunResult } from '../record/result.js';

export function programSummary(r: RunResult): string[] {
  if (r.program === undefined || r.segments === undefined) return [];
  const out = [`  program       ${r.program}: ${r.segments.length} segments`];
  for (const s of r.segments) {
    const moved = s.kind === 'rest' ? '' : `, ${(s.charge_Ah * 1000).toFixed(1)} mAh`;
    const cycle = s.cycle === null ? '' : ` (cycle ${s.cycle})`;
    out.push(
      `    ${s.index} ${s.kind}${cycle}: ${s.end_reason}, ${s.duration_s.toFixed(0)} s${moved}`,
    );
  }
  for (const c of r.cycles ?? [])
    out.push(
      `  cycle ${c.cycle}       ${(c.capacity_Ah * 1000).toFixed(1)} mAh ± ${(c.uncertainty.capacity_Ah.expanded * 1000).toFixed(1)} mAh (k = 2), ${(c.of_first * 100).toFixed(1)} % of the first`,
    );
  const t = r.cycle_trend ?? null;
  if (t !== null && t.slope_Ah_per_cycle !== null)
    out.push(
      `  trend         ${(t.slope_Ah_per_cycle * 1000).toFixed(2)} mAh per cycle${t.change_beyond_uncertainty ? ', beyond the uncertainty' : ''}`,
    );
  if ((r.cycles ?? []).length === 0)
    out.push('  no discharge reached its cutoff: the figures below are zero');
  return out;
}
